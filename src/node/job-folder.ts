// defines: refuseFilledFolder, jobProgramFiles — the Node side of writing a job folder for
// torch.distributed, shared by `spanwright job` (src/cli/commands/job.ts) and the base
// recipe's masked-LM job (tiny-models/recipe/build-base.ts --job): a folder is written
// only when new or empty, and the program's files are read from this installation's
// jobs/torch/. The folder's contents: ReaderSession.torchJob and src/io/torch-job.ts.
import { readFile, readdir } from 'node:fs/promises';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { ExportFile } from '../io/export.js';
import { JOB_PROGRAM_FILES } from '../io/torch-job.js';
import { UserError } from './user-error.js';

/** The program's files, shipped in the repository and copied into every job folder. */
const PROGRAM_DIR = fileURLToPath(new URL('../../jobs/torch/', import.meta.url));

/** A job goes into a new or empty folder: writing over another job's files would mix two runs. */
export async function refuseFilledFolder(out: string): Promise<void> {
  let names: string[];
  try {
    names = await readdir(out);
  } catch (err) {
    if ((err as NodeJS.ErrnoException).code === 'ENOENT') return;
    throw new UserError(`${out}: cannot be read as a folder (${(err as NodeJS.ErrnoException).code ?? (err as Error).message})`);
  }
  if (names.length > 0) throw new UserError(`${out}: the folder is not empty; a job folder is written into a new or empty folder`);
}

/** The program's files (jobs/torch/), as they go into a job folder. */
export async function jobProgramFiles(): Promise<ExportFile[]> {
  const out: ExportFile[] = [];
  for (const name of JOB_PROGRAM_FILES) {
    try {
      out.push({ name, bytes: new Uint8Array(await readFile(join(PROGRAM_DIR, name))) });
    } catch {
      throw new UserError(`${join(PROGRAM_DIR, name)}: the job program is missing from this installation`);
    }
  }
  return out;
}
