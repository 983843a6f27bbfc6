// defines: lockOutputFolder, OutputLock — one training run per output folder. Two runs
// writing checkpoints into one folder would prune each other's checkpoints and leave
// whichever model finished last, so a run takes `<dir>/.spanwright-lock` (created
// exclusively, holding its process id and start time) and refuses a folder another
// living process holds. A lock whose process is gone (killed, crashed) is stale: it is
// taken over, with a note.
import { mkdir, open, readFile, rm } from 'node:fs/promises';
import { hostname } from 'node:os';
import { join } from 'node:path';
import { UserError } from './common.js';
import { writeErrorMessage } from '../node/write-files.js';

export const LOCK_FILE = '.spanwright-lock';

export interface OutputLock {
  /** the stale lock taken over, if there was one */
  tookOverFrom: number | null;
  release(): Promise<void>;
}

/** Whether a process with this id runs on this machine (signal 0 only asks). */
function alive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (err) {
    return (err as NodeJS.ErrnoException).code === 'EPERM';
  }
}

export async function lockOutputFolder(dir: string, what = 'training'): Promise<OutputLock> {
  try {
    await mkdir(dir, { recursive: true });
  } catch (err) {
    throw new UserError(await writeErrorMessage(err, dir, 0));
  }
  const path = join(dir, LOCK_FILE);
  let tookOverFrom: number | null = null;
  for (let attempt = 0; attempt < 2; attempt++) {
    try {
      const text = `${JSON.stringify({ pid: process.pid, host: hostname(), what, since: new Date().toISOString() })}\n`;
      const handle = await open(path, 'wx');
      try {
        await handle.writeFile(text);
        await handle.close();
      } catch (err) {
        // a full disk lets the file be created but not written: take the empty lock away
        // again and say so, rather than leave it for the next run to puzzle over
        await handle.close().catch(() => undefined);
        await rm(path, { force: true });
        throw new UserError(await writeErrorMessage(err, path, text.length));
      }
      let released = false;
      const release = async () => {
        if (released) return;
        released = true;
        await rm(path, { force: true });
      };
      return { tookOverFrom, release };
    } catch (err) {
      if (err instanceof UserError) throw err;
      if ((err as NodeJS.ErrnoException).code !== 'EEXIST') throw new UserError(await writeErrorMessage(err, path, 0));
    }
    let held: { pid?: number; host?: string; what?: string; since?: string } = {};
    try {
      held = JSON.parse(await readFile(path, 'utf8')) as typeof held;
    } catch {
      // unreadable or half-written: treated as stale below
    }
    const sameHost = held.host === undefined || held.host === hostname();
    if (typeof held.pid === 'number' && (!sameHost || alive(held.pid))) {
      throw new UserError(
        `${dir} is in use: another ${held.what ?? 'run'} (process ${held.pid}${sameHost ? '' : ` on ${held.host}`}, since ${held.since ?? 'an unknown time'}) writes there. ` +
          `Give this run its own --out, or wait for that one to end. If no such run exists, delete ${path}.`,
      );
    }
    tookOverFrom = typeof held.pid === 'number' ? held.pid : -1;
    await rm(path, { force: true });
  }
  throw new UserError(`${dir}: could not take ${LOCK_FILE} (another run keeps taking it)`);
}
