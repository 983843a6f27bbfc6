// defines: the `check` command — reads a question file, reports every problem with its
// file, record and field, and optionally writes the repaired records that passed.
// Exit code 1 when there are errors, 0 otherwise.
import { writeFileAtomically } from '../../node/write-files.js';
import { resolve } from 'node:path';
import type { Command } from 'commander';
import cliProgress from 'cli-progress';
import { UserError, printJson, readBytes, runCommand } from '../common.js';
import { loadDataset, writeDataset } from '../../data/load.js';
import { DATA_FORMATS, formatFromName, type DataFormat } from '../../data/formats/detect.js';
import { formatProblem, summarise } from '../../data/validate.js';

interface CheckOptions {
  json?: boolean;
  format?: string;
  writeClean?: string;
}

/** Problems printed in the human report before "... and N more". */
const SHOWN_PROBLEMS = 50;
/** Files with fewer records than this finish too fast for a progress bar to help. */
const PROGRESS_MIN_RECORDS = 5000;

export function register(program: Command): void {
  program
    .command('check')
    .description('check a question file (SQuAD 1.1/2.0 JSON, JSONL, CSV, TSV) and report what is wrong, record by record')
    .argument('<file>', 'the data file; its extension names the format (.json, .jsonl, .csv, .tsv)')
    .option('--json', 'print the report as one JSON object on the last line of output')
    .option('--format <format>', `read the file as ${DATA_FORMATS.join(', ')} whatever its name`)
    .option('--write-clean <file>', "write the records that passed, repaired, in the format this name's extension gives")
    .addHelpText(
      'after',
      `
Every problem names the file, the record (counted from 1, as the workbench counts; for
CSV the data row also says its row), and the field. In --json, "record" is the 0-based
index.
Errors leave a record out; warnings keep it. A repair is a warning saying what changed:
an answer start moved to the only place its text occurs, or CR/CRLF line breaks inside
text turned into LF (with answer starts moved to match).

Exit status: 0 without errors, 1 with errors.

Examples:
  spanwright check questions.jsonl
  spanwright check squad-dev.json --json
  spanwright check export.csv --write-clean clean.jsonl`,
    )
    .action((file: string, options: CheckOptions) => runCommand(() => check(file, options)));
}

async function check(file: string, options: CheckOptions): Promise<number> {
  const format = options.format === undefined ? undefined : parseFormat(options.format);
  const cleanFormat = options.writeClean === undefined ? undefined : cleanFormatOf(options.writeClean, file);
  const bytes = await readBytes(file);

  let bar: cliProgress.SingleBar | null = null;
  const result = loadDataset(bytes, file, {
    format,
    onProgress: (done, total) => {
      if (options.json || !process.stderr.isTTY || total < PROGRESS_MIN_RECORDS) return;
      if (!bar) {
        bar = new cliProgress.SingleBar(
          { stream: process.stderr, format: 'checking {bar} {value}/{total} records', hideCursor: true },
          cliProgress.Presets.shades_classic,
        );
        bar.start(total, 0);
      }
      bar.update(done);
    },
  });
  // (the cast: TypeScript does not see the callback above assign `bar`)
  (bar as cliProgress.SingleBar | null)?.stop();

  const summary = summarise(result);
  const errors = result.problems.filter((p) => p.severity === 'error');
  const warnings = result.problems.filter((p) => p.severity === 'warning');

  if (options.writeClean !== undefined && cleanFormat !== undefined) {
    await writeAtomically(options.writeClean, writeDataset(result.records, cleanFormat));
    const line = `wrote ${result.records.length} record(s) to ${options.writeClean}\n`;
    (options.json ? process.stderr : process.stdout).write(line);
  }

  if (options.json) {
    printJson({ file, format: result.format, ...summary, errors, warnings });
  } else {
    const out = process.stdout;
    for (const p of result.problems.slice(0, SHOWN_PROBLEMS)) out.write(`${formatProblem(p)}\n`);
    if (result.problems.length > SHOWN_PROBLEMS) {
      out.write(`... and ${result.problems.length - SHOWN_PROBLEMS} more (--json lists them all)\n`);
    }
    out.write(
      `${file}${result.format ? ` (${result.format})` : ''}: ${summary.records} record(s) passed, ` +
        `${summary.passages} passage(s), ${summary.unanswerable} unanswerable; ` +
        `${summary.errors} error(s), ${summary.warnings} warning(s), ${summary.repairs} repair(s)\n`,
    );
  }
  return errors.length > 0 ? 1 : 0;
}

function parseFormat(name: string): DataFormat {
  const f = DATA_FORMATS.find((d) => d === name.toLowerCase());
  if (!f) throw new UserError(`--format: unknown format "${name}"; use one of ${DATA_FORMATS.join(', ')}`);
  return f;
}

function cleanFormatOf(out: string, input: string): DataFormat {
  if (resolve(out) === resolve(input)) {
    throw new UserError(`--write-clean: ${out} is the file being checked; write the clean copy elsewhere`);
  }
  const f = formatFromName(out);
  if (!f) throw new UserError(`--write-clean: cannot tell the format of ${out}; end it in .json, .jsonl, .csv or .tsv`);
  return f;
}

/** Write beside the target, then rename (src/node/write-files.ts): a failure leaves no temporary file behind. */
async function writeAtomically(path: string, text: string): Promise<void> {
  try {
    await writeFileAtomically(path, text);
  } catch (err) {
    throw new UserError(`--write-clean: ${(err as Error).message}`);
  }
}
