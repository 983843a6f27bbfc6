// The workbench's static server (src/cli/serve.ts) against odd requests: folders, paths
// outside the served folder, malformed escapes, a file that vanishes, other methods. No
// request may end the server; each gets an answer. On 127.0.0.1, bounded in count and time.
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { request } from 'node:http';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startServer, type RunningServer } from '../../src/cli/serve.js';

let root: string;
let server: RunningServer;

function get(path: string, method = 'GET'): Promise<{ status: number; body: string }> {
  return new Promise((resolve, reject) => {
    const url = new URL(server.url);
    const req = request({ host: '127.0.0.1', port: url.port, path, method, timeout: 5000 }, (res) => {
      let body = '';
      res.on('data', (c: Buffer) => (body += c.toString()));
      res.on('end', () => resolve({ status: res.statusCode ?? 0, body }));
      res.on('error', reject);
    });
    req.on('timeout', () => req.destroy(new Error(`${method} ${path}: no answer within 5 s (did the server end?)`)));
    req.on('error', reject);
    req.end();
  });
}

beforeAll(async () => {
  root = mkdtempSync(join(tmpdir(), 'spanwright-serve-'));
  for (const dir of ['assets', 'base', 'demo', 'tfjs-wasm', 'empty']) mkdirSync(join(root, dir));
  writeFileSync(join(root, 'index.html'), '<!doctype html><title>t</title>');
  writeFileSync(join(root, 'assets', 'app.js'), 'export {};');
  server = await startServer({ root, port: 0 });
});

afterAll(async () => {
  await server.close();
  rmSync(root, { recursive: true, force: true });
});

describe('the static server', () => {
  it('answers folders, odd paths and methods without ending, and keeps serving files', async () => {
    const odd = [
      '/assets',
      '/base',
      '/demo',
      '/tfjs-wasm',
      '/empty',
      '/empty/',
      '/assets/',
      '/base/',
      '/nothing',
      '/%',
      '/%E0%A4%A',
      '/../../etc/passwd',
      '/%2e%2e/%2e%2e/etc/passwd',
      '//',
      '/index.html/',
      '/assets/app.js/x',
      `/${'a'.repeat(2000)}`,
    ];
    const started = Date.now();
    for (let round = 0; round < 3; round++) {
      for (const path of odd) {
        const r = await get(path);
        expect([400, 403, 404], `${path} → ${r.status}`).toContain(r.status);
      }
      expect((await get('/assets', 'HEAD')).status).toBe(404);
      expect((await get('/', 'POST')).status).toBe(405);
    }
    expect(Date.now() - started).toBeLessThan(20_000);
    // still serving; "/.." is "/" once the URL is normalised
    expect((await get('/..')).status).toBe(200);
    const index = await get('/');
    expect(index.status).toBe(200);
    expect(index.body).toContain('<title>t</title>');
    expect((await get('/assets/app.js')).status).toBe(200);
  });

  it('answers a file that disappears between two requests with 404', async () => {
    writeFileSync(join(root, 'gone.txt'), 'here');
    expect((await get('/gone.txt')).status).toBe(200);
    rmSync(join(root, 'gone.txt'));
    expect((await get('/gone.txt')).status).toBe(404);
    expect((await get('/')).status).toBe(200);
  });
});
