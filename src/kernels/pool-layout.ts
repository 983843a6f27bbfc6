// defines: the job area kernels.c reads (its pool_t) and the job kinds (its JOB_* enum),
// word for word as kernels.c declares them, and f32 (a float argument's int bits)
//
// A job is written into a pool_t — kind, task count, up to JOB_ARGS int arguments — and
// run by job_run (this thread) or pool_run (with the helper threads, threads.ts). The
// argument order of each kind is listed beside it in kernels.c's run_task.

/** Int32 indices of pool_t's fields. */
export const POOL_GEN = 0;
export const POOL_CLAIM = 1;
export const POOL_DONE = 2;
export const POOL_KIND = 3;
export const POOL_TASKS = 4;
export const POOL_ACTIVE = 5;
export const POOL_QUIT = 6;
export const POOL_ALIVE = 7;
export const POOL_SPIN = 8;
export const POOL_FAILED = 9;
export const POOL_WS = 16;
export const POOL_ARGS = 48;
export const POOL_TAKEN = 80;

export const MAX_THREADS = 32;
export const JOB_ARGS = 32;
/** sizeof(pool_t) */
export const POOL_BYTES = (POOL_TAKEN + MAX_THREADS) * 4;
/** the claim word holds (tasks << 16) | next */
export const MAX_TASKS = 32767;

export const JOB = {
  gemm: 1,
  attentionForward: 2,
  attentionBackward: 3,
  biasGelu: 4,
  biasGeluDx: 5,
  sumCols: 6,
  layerNorm: 7,
  layerNormDx: 8,
  layerNormDparams: 9,
  dropout: 10,
  adamw: 11,
  erf: 12,
  segmentSum: 13,
} as const;

export type JobKind = (typeof JOB)[keyof typeof JOB];

const bits = new DataView(new ArrayBuffer(4));

/** The float32 nearest `x`, as the int whose bits it has (kernels.c reads it back). */
export function f32(x: number): number {
  bits.setFloat32(0, x, true);
  return bits.getInt32(0, true);
}
