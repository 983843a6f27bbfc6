// defines: jobProgram — the job program's files (jobs/torch/*.py) as the workbench's
// engine worker puts them into a job folder (ReaderSession.torchJob). vite's `?raw`
// imports bring them into the bundle at build time, so nothing is fetched to write a
// folder; the CLI reads the same files from the installation (src/cli/commands/job.ts).
import jobFiles from '../jobs/torch/job_files.py?raw';
import masking from '../jobs/torch/masking.py?raw';
import readerModel from '../jobs/torch/reader_model.py?raw';
import trainReader from '../jobs/torch/train_reader.py?raw';
import type { ExportFile } from '../src/io/export.js';
import { JOB_PROGRAM_FILES } from '../src/io/torch-job.js';

/** Each program file's text, by the name JOB_PROGRAM_FILES gives it (the compiler checks none is left out). */
const PROGRAM: Record<(typeof JOB_PROGRAM_FILES)[number], string> = {
  'train_reader.py': trainReader,
  'reader_model.py': readerModel,
  'job_files.py': jobFiles,
  'masking.py': masking,
};

/** The program's files in JOB_PROGRAM_FILES order, UTF-8 as in the repository. */
export function jobProgram(): ExportFile[] {
  const encoder = new TextEncoder();
  return JOB_PROGRAM_FILES.map((name) => ({ name, bytes: encoder.encode(PROGRAM[name]) }));
}
