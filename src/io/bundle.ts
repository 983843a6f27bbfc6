// defines: bundleStem, zipBundle — one model directory (export.ts) as one ZIP file, so that
// a float32 and a float16 export of the same reader download as two files with their own
// names instead of two `model.safetensors` that overwrite each other.
//
// The archive holds one folder named like the ZIP file itself, with the directory's files
// under their usual names (config.json, model.safetensors, vocab.txt, MODEL_CARD.md, …),
// so that unpacking it gives a folder every loader of a model directory reads as is.
// Written by fflate's zipSync (npm `fflate`); weights are stored (ZIP method 0) because
// float bytes hardly shrink under DEFLATE and storing keeps the page's main thread free,
// text files are deflated (method 8).
import { zipSync, type Zippable } from 'fflate';
import type { ExportFile } from './export.js';

/** What a bundle is named after: the reader (a label for people) and how its weights are stored. */
export interface BundleName {
  /** "base", "fine-tuned, update 120", "run r3 at update 12", … */
  reader: string;
  /** "float32", "float16", "float32 + int8", "float32 + ONNX", … */
  variant: string;
}

/** Binary files of a model directory; everything else is text and is deflated. */
const STORED = /\.(safetensors|onnx)$/;

/** Lower case letters, digits and single hyphens; at most `max` characters. */
function slug(text: string, max: number): string {
  const s = text
    .toLowerCase()
    .normalize('NFKD')
    .replace(/[^a-z0-9]+/g, '-')
    .replace(/^-+|-+$/g, '');
  return s.slice(0, max).replace(/-+$/, '');
}

/**
 * The file name of a bundle without `.zip`, safe on every common file system:
 * `spanwright-<reader>-<variant>`, e.g. `spanwright-fine-tuned-update-120-float16`.
 */
export function bundleStem(name: BundleName): string {
  const reader = slug(name.reader, 60) || 'reader';
  const variant = slug(name.variant, 30) || 'model';
  return `spanwright-${reader}-${variant}`;
}

/**
 * The files in one ZIP archive under the folder `stem/`. `date` sets every entry's
 * modification time (ZIP keeps local DOS time, 1980 onwards); default now.
 */
export function zipBundle(files: readonly ExportFile[], stem: string, date?: Date): Uint8Array {
  const entries: Zippable = {};
  const seen = new Set<string>();
  for (const f of files) {
    if (seen.has(f.name)) throw new Error(`the bundle ${stem} would hold two files named ${f.name}`);
    seen.add(f.name);
    entries[`${stem}/${f.name}`] = [f.bytes, { level: STORED.test(f.name) ? 0 : 6 }];
  }
  return zipSync(entries, { mtime: date ?? new Date() });
}
