// defines: the `inspect` command — what a safetensors file holds: every tensor's name,
// dtype, shape and byte size, and the file's metadata, after checking the whole file
// against the format (src/io/safetensors.ts).
import type { Command } from 'commander';
import { open } from 'node:fs/promises';
import { UserError, printJson, runCommand } from '../common.js';
import { DTYPE_BYTES, MAX_HEADER_BYTES, SafetensorsError, readSafetensorsHeader } from '../../io/safetensors.js';

interface InspectOptions {
  json?: boolean;
}

export function register(program: Command): void {
  program
    .command('inspect')
    .description('list the tensors of a .safetensors file: names, dtypes, shapes, sizes, metadata')
    .argument('<file>', 'a .safetensors file')
    .option('--json', 'print the listing as one JSON object on the last line of output')
    .addHelpText(
      'after',
      `
The whole header is checked first (offsets inside the file, no overlaps or holes, sizes
that match the shapes); a bad file is reported with the tensor and field at fault.

JSON output: {file, bytes, headerBytes, tensorCount, parameterCount, metadata,
tensors: [{name, dtype, shape, bytes, offset}]}, offsets relative to the data section.

Examples:
  spanwright inspect model.safetensors
  spanwright inspect exported/model.int8.safetensors --json`,
    )
    .action((file: string, options: InspectOptions) => runCommand(() => inspect(file, options)));
}

/**
 * The first bytes of the file — the 8-byte length and the header it gives — and the file's
 * size: only the header is needed, so a file larger than one read can take (2 GiB in Node)
 * is inspected all the same.
 */
async function readHead(file: string): Promise<{ head: Uint8Array; size: number }> {
  let handle;
  try {
    handle = await open(file, 'r');
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code;
    throw new UserError(code === 'ENOENT' ? `${file}: no such file` : `${file}: cannot read (${code ?? (err as Error).message})`);
  }
  try {
    const info = await handle.stat();
    if (!info.isFile()) throw new UserError(`${file}: is a folder, not a file`);
    const size = info.size;
    const first = new Uint8Array(Math.min(8, size));
    await handle.read(first, 0, first.length, 0);
    if (first.length < 8) return { head: first, size };
    const n = new DataView(first.buffer).getBigUint64(0, true);
    // a header longer than the format's limit is reported by readSafetensorsHeader from the first 8 bytes alone
    const want = n > BigInt(MAX_HEADER_BYTES) ? 0 : Math.min(Number(n), size - 8);
    const head = new Uint8Array(8 + want);
    head.set(first);
    if (want > 0) await handle.read(head, 8, want, 8);
    return { head, size };
  } finally {
    await handle.close();
  }
}

async function inspect(file: string, options: InspectOptions): Promise<void> {
  const { head, size } = await readHead(file);
  let header;
  try {
    header = readSafetensorsHeader(head, file, size);
  } catch (err) {
    if (err instanceof SafetensorsError) throw new UserError(err.message);
    throw err;
  }
  const tensors = header.entries.map((e) => ({
    name: e.name,
    dtype: e.dtype,
    shape: e.shape,
    bytes: e.end - e.begin,
    offset: e.begin,
  }));
  const parameterCount = tensors.reduce((sum, t) => sum + t.bytes / DTYPE_BYTES[t.dtype], 0);
  if (options.json) {
    printJson({
      file,
      bytes: size,
      headerBytes: header.headerBytes,
      tensorCount: tensors.length,
      parameterCount,
      metadata: header.metadata,
      tensors,
    });
    return;
  }
  const out = process.stdout;
  out.write(
    `${file}: ${tensors.length} tensor(s), ${parameterCount.toLocaleString('en-US')} values, ${size.toLocaleString('en-US')} bytes (header ${header.headerBytes})\n`,
  );
  const metaKeys = Object.keys(header.metadata);
  if (metaKeys.length > 0) {
    out.write('\nmetadata:\n');
    for (const k of metaKeys) {
      const v = header.metadata[k]!;
      out.write(`  ${k}: ${v.length > 200 ? `${v.slice(0, 200)}… (${v.length} characters)` : v}\n`);
    }
  }
  if (tensors.length === 0) return;
  // a loop, not Math.max(...names): a header may list millions of tensors, more arguments than a call takes
  const nameWidth = Math.min(
    72,
    tensors.reduce((w, t) => Math.max(w, t.name.length), 0),
  );
  out.write(`\n${'name'.padEnd(nameWidth)}  ${'dtype'.padEnd(5)}  ${'shape'.padEnd(16)}  ${'bytes'.padStart(12)}\n`);
  for (const t of tensors) {
    out.write(
      `${t.name.padEnd(nameWidth)}  ${t.dtype.padEnd(5)}  ${`[${t.shape.join(', ')}]`.padEnd(16)}  ${t.bytes.toLocaleString('en-US').padStart(12)}\n`,
    );
  }
}
