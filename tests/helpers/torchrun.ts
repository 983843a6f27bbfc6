// defines: torchrunArgs — the launcher arguments of a one-machine torchrun with its own
// rendezvous port. `--standalone` puts every run's rendezvous on localhost:29400 (torch
// 1.13's torch/distributed/run.py sets it so), so two test files launching torchrun at
// the same time (vitest runs files in parallel) collide; a port the system hands out
// free keeps them apart. Debian's torch 1.13 launcher on Python 3.11 also needs
// --redirects and --tee set: it reads their default "0" as no value and fails.
import { randomUUID } from 'node:crypto';
import { createServer } from 'node:net';

/** A TCP port on 127.0.0.1 that was free a moment ago (bound to port 0, read, closed). */
async function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const server = createServer();
    server.once('error', reject);
    server.listen(0, '127.0.0.1', () => {
      const address = server.address();
      const port = typeof address === 'object' && address !== null ? address.port : 0;
      server.close(() => (port > 0 ? resolve(port) : reject(new Error('no free port was handed out'))));
    });
  });
}

/** `python -m torch.distributed.run` arguments for `processes` workers on this machine. */
export async function torchrunArgs(processes: number): Promise<string[]> {
  const port = await freePort();
  return [
    '-m',
    'torch.distributed.run',
    '--nnodes',
    '1',
    '--rdzv_backend',
    'c10d',
    '--rdzv_endpoint',
    `127.0.0.1:${port}`,
    '--rdzv_id',
    randomUUID(),
    '--nproc_per_node',
    String(processes),
    '--redirects',
    '1',
    '--tee',
    '1',
  ];
}
