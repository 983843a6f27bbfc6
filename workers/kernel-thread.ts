// defines: a helper thread of the fast kernels in the browser — a Web Worker nested in
// the engine worker (workers/engine-worker.ts starts one per extra core). Its first
// message is a KernelThreadStart (the compiled kernels and the shared tfjs heap); it
// then serves kernel jobs inside runKernelThread until the pool stops
// (src/kernels/threads.ts). It never renders or answers anything else.
import { runKernelThread, type KernelThreadStart } from '../src/kernels/threads.js';

const scope = self as unknown as { onmessage: ((e: MessageEvent<KernelThreadStart>) => void) | null };

scope.onmessage = (e: MessageEvent<KernelThreadStart>) => {
  scope.onmessage = null;
  runKernelThread(e.data);
};
