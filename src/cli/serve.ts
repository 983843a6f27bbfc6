// defines: the `npm start` server — builds the browser workbench with vite and serves
// dist/ on localhost (PORT, default 5417) with the headers the workbench needs:
//
//   Cross-Origin-Opener-Policy: same-origin   } together they make the page cross-origin
//   Cross-Origin-Embedder-Policy: require-corp } isolated, which tfjs-wasm needs for threads
//   Content-Security-Policy   only this origin; 'wasm-unsafe-eval' to compile WebAssembly;
//                             blob: for scripts and workers because tfjs-wasm's threaded
//                             build starts its pthread workers from blob: URLs
//
// `--no-build` serves an existing dist/ as it is. buildWorkbench and startServer are
// exported for the browser end-to-end tests (tests/e2e/).
import { createReadStream } from 'node:fs';
import { stat } from 'node:fs/promises';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { extname, join, normalize, resolve, sep } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';

const PROJECT = fileURLToPath(new URL('../../', import.meta.url));
export const DIST = join(PROJECT, 'dist');
export const DEFAULT_PORT = 5417;

export const CONTENT_SECURITY_POLICY = [
  "default-src 'self'",
  "script-src 'self' 'wasm-unsafe-eval' blob:",
  "worker-src 'self' blob:",
  "connect-src 'self' blob:",
  "img-src 'self' blob:",
  "style-src 'self'",
  "font-src 'self'",
  "object-src 'none'",
  "base-uri 'self'",
  "form-action 'none'",
  "frame-ancestors 'none'",
].join('; ');

export const SECURITY_HEADERS: Readonly<Record<string, string>> = {
  'Cross-Origin-Opener-Policy': 'same-origin',
  'Cross-Origin-Embedder-Policy': 'require-corp',
  'Cross-Origin-Resource-Policy': 'same-origin',
  'Content-Security-Policy': CONTENT_SECURITY_POLICY,
  'X-Content-Type-Options': 'nosniff',
  'Referrer-Policy': 'no-referrer',
};

const TYPES: Record<string, string> = {
  '.html': 'text/html; charset=utf-8',
  '.js': 'text/javascript; charset=utf-8',
  '.css': 'text/css; charset=utf-8',
  '.json': 'application/json; charset=utf-8',
  '.jsonl': 'application/x-ndjson; charset=utf-8',
  '.wasm': 'application/wasm', // streaming compilation requires this type
  '.txt': 'text/plain; charset=utf-8',
  '.md': 'text/markdown; charset=utf-8',
  '.png': 'image/png',
  '.svg': 'image/svg+xml',
  '.safetensors': 'application/octet-stream',
};

/** Runs vite's production build into dist/. */
export async function buildWorkbench(): Promise<void> {
  const { build } = await import('vite');
  await build({ configFile: join(PROJECT, 'vite.config.ts') });
}

export interface RunningServer {
  url: string;
  server: Server;
  close(): Promise<void>;
}

/** Serves `root` on 127.0.0.1:`port` (0 picks a free port). */
export function startServer(options: { root?: string; port?: number } = {}): Promise<RunningServer> {
  const root = resolve(options.root ?? DIST);
  const server = createServer((req, res) => {
    for (const [k, v] of Object.entries(SECURITY_HEADERS)) res.setHeader(k, v);
    if (req.method !== 'GET' && req.method !== 'HEAD') {
      res.writeHead(405, { Allow: 'GET, HEAD' }).end();
      return;
    }
    let path: string;
    try {
      path = decodeURIComponent(new URL(req.url ?? '/', 'http://localhost').pathname);
    } catch {
      res.writeHead(400).end('bad request path');
      return;
    }
    const file = normalize(join(root, path.endsWith('/') ? `${path}index.html` : path));
    if (file !== root && !file.startsWith(root + sep)) {
      res.writeHead(403).end('outside the served folder');
      return;
    }
    const notFound = () => {
      if (!res.headersSent) res.writeHead(404, { 'Content-Type': 'text/plain; charset=utf-8' }).end(`not found: ${path}`);
    };
    // every outcome answers the request; none may end the server (a folder, a vanished file, a read error)
    stat(file)
      .then((s) => {
        if (!s.isFile()) return notFound();
        res.writeHead(200, {
          'Content-Type': TYPES[extname(file)] ?? 'application/octet-stream',
          'Content-Length': s.size,
          // hashed build files never change; everything else is checked on each load
          'Cache-Control': file.includes(`${sep}assets${sep}`) ? 'public, max-age=31536000, immutable' : 'no-cache',
        });
        if (req.method === 'HEAD') return void res.end();
        const stream = createReadStream(file);
        stream.on('error', () => res.destroy());
        stream.pipe(res);
      })
      .catch(notFound);
  });
  return new Promise((resolveStart, reject) => {
    server.once('error', reject);
    server.listen(options.port ?? DEFAULT_PORT, '127.0.0.1', () => {
      const { port } = server.address() as AddressInfo;
      resolveStart({
        url: `http://localhost:${port}/`,
        server,
        close: () => new Promise<void>((done) => server.close(() => done())),
      });
    });
  });
}

async function main(): Promise<void> {
  const port = process.env.PORT === undefined || process.env.PORT === '' ? DEFAULT_PORT : Number(process.env.PORT);
  if (!Number.isInteger(port) || port < 0 || port > 65535) {
    process.stderr.write(`spanwright serve: PORT must be a whole number from 0 to 65535, got "${process.env.PORT}"\n`);
    process.exitCode = 1;
    return;
  }
  if (!process.argv.includes('--no-build')) {
    process.stdout.write('building the workbench (vite)…\n');
    await buildWorkbench();
  }
  try {
    await stat(join(DIST, 'index.html'));
  } catch {
    process.stderr.write(`spanwright serve: ${DIST} holds no index.html; run without --no-build first\n`);
    process.exitCode = 1;
    return;
  }
  const { url } = await startServer({ port });
  process.stdout.write(`Spanwright workbench: ${url}  (Ctrl+C to stop)\n`);
}

if (process.argv[1] !== undefined && import.meta.url === pathToFileURL(process.argv[1]).href) {
  main().catch((err: unknown) => {
    process.stderr.write(`spanwright serve: ${(err as Error).message}\n`);
    process.exitCode = 1;
  });
}
