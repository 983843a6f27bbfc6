// defines: OperandCache — where a job's operands go in a copies pool's memory (threads.ts),
// and which of them are there already
//
// In Node the kernel pool computes in its own shared memory, so a job's inputs are
// copied in and its outputs copied back (jobs.ts). Most inputs of a training step were
// there already: an output of the job before (q, k, v feed attention; the first
// feed-forward product feeds GELU) or an input of a recent one (x feeds q, k and v; the
// forward's activations feed the weight gradients). Measured on one L2-H128-T256-B16
// step: 210 of the 239 MB copied in were such tensors. tfjs tensors never change their
// data (a Variable's assign takes a new data id), so a copy stays good while it is not
// overwritten, and the data id names it.
//
// The cache is a ring of `capacity` bytes filled in order. A job gets one contiguous
// block for the inputs it misses, its outputs and its scratch, placed after the last
// one (or back at the start); copies the block overlaps are dropped, and an input the
// job hits but whose copy the block would overwrite is counted a miss instead. Outputs
// join the cache only once their job has run. A job larger than the ring clears it and
// takes memory from its start.

export interface Operand {
  /** the tensor's data id (tfjs keeps one per distinct data) */
  key: object;
  bytes: number;
}

interface Entry {
  key: object;
  addr: number;
  bytes: number;
}

export interface Placement {
  /** address of every input (hits and misses) and output, by data id */
  addr: Map<object, number>;
  /** the inputs to copy in */
  misses: Operand[];
  /** the scratch block's address (0 when none was asked for) */
  scratch: number;
  /** one past the last byte the job uses (the memory must reach it) */
  end: number;
}

const ALIGN = 64; // one cache line

function aligned(bytes: number): number {
  return (bytes + ALIGN - 1) & ~(ALIGN - 1);
}

export class OperandCache {
  private readonly entries = new Map<object, Entry>();
  /** next free offset in the ring */
  private head = 0;
  /** bytes copied in (misses) and not needed (hits), for the benchmarks */
  readonly counts = { hitBytes: 0, missBytes: 0 };

  /** A ring of `capacity` bytes at `base` in the pool memory. */
  constructor(
    private readonly base: number,
    private readonly capacity: number,
  ) {}

  /** Bytes of these inputs the cache does not hold (each data id once). */
  missingBytes(inputs: Operand[]): number {
    const unique = new Map(inputs.map((op) => [op.key, op]));
    let bytes = 0;
    for (const op of unique.values()) if (!this.entries.has(op.key)) bytes += op.bytes;
    return bytes;
  }

  /** Places one job. */
  place(inputs: Operand[], outputs: Operand[], scratchBytes: number): Placement {
    const unique = [...new Map(inputs.map((op) => [op.key, op])).values()];
    const hits = new Set(unique.filter((op) => this.entries.has(op.key)).map((op) => op.key));
    const blockBytes = (): number =>
      unique.filter((op) => !hits.has(op.key)).reduce((s, op) => s + aligned(op.bytes), 0) +
      outputs.reduce((s, op) => s + aligned(op.bytes), 0) +
      aligned(scratchBytes);
    // 1. the block, and hits it would overwrite become misses (the block grows; repeat)
    let start = 0;
    let need = 0;
    for (;;) {
      need = blockBytes();
      if (need > this.capacity) return this.flush(unique, outputs, scratchBytes);
      start = this.head + need <= this.capacity ? this.head : 0;
      const doomed = [...hits].filter((key) => this.overlaps(this.entries.get(key)!, start, need));
      if (doomed.length === 0) break;
      for (const key of doomed) hits.delete(key);
    }
    // 2. drop every copy the block overlaps
    for (const [key, e] of this.entries) if (this.overlaps(e, start, need)) this.entries.delete(key);
    // 3. addresses: misses, outputs, scratch, in that order
    const addr = new Map<object, number>();
    let at = start;
    const misses: Operand[] = [];
    for (const op of unique) {
      if (hits.has(op.key)) {
        addr.set(op.key, this.base + this.entries.get(op.key)!.addr);
        this.counts.hitBytes += op.bytes;
        continue;
      }
      addr.set(op.key, this.base + at);
      this.entries.set(op.key, { key: op.key, addr: at, bytes: op.bytes });
      misses.push(op);
      this.counts.missBytes += op.bytes;
      at += aligned(op.bytes);
    }
    for (const op of outputs) {
      addr.set(op.key, this.base + at);
      at += aligned(op.bytes);
    }
    const scratch = scratchBytes > 0 ? this.base + at : 0;
    this.head = start + need;
    return { addr, misses, scratch, end: this.base + start + need };
  }

  /** Outputs of a job that has run: their copies are good from now on. */
  commit(outputs: Operand[], placement: Placement): void {
    for (const op of outputs) {
      const addr = placement.addr.get(op.key)! - this.base;
      if (addr >= 0 && addr + op.bytes <= this.capacity) this.entries.set(op.key, { key: op.key, addr, bytes: op.bytes });
    }
  }

  /** Forgets every copy (after a job whose outputs cannot be trusted, or one larger than the ring). */
  clear(): void {
    this.entries.clear();
    this.head = 0;
  }

  private overlaps(e: Entry, start: number, bytes: number): boolean {
    return e.addr < start + bytes && start < e.addr + aligned(e.bytes);
  }

  /** A job larger than the ring: the ring is cleared and the job laid out from its start, past its end if need be. */
  private flush(inputs: Operand[], outputs: Operand[], scratchBytes: number): Placement {
    this.clear();
    for (const op of inputs) this.counts.missBytes += op.bytes;
    const addr = new Map<object, number>();
    let at = this.base;
    for (const op of [...inputs, ...outputs]) {
      addr.set(op.key, at);
      at += aligned(op.bytes);
    }
    const scratch = scratchBytes > 0 ? at : 0;
    at += aligned(scratchBytes);
    this.head = this.capacity; // the next job starts the ring afresh
    return { addr, misses: inputs, scratch, end: at };
  }
}
