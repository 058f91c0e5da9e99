// Worker pool: runs notebook steps in Go compute workers, never on the page
// thread. Each job gets progress callbacks and can be cancelled; a worker that
// does not acknowledge a cancel within CANCEL_GRACE_MS (0.4 s) is terminated and
// replaced, so Cancel always takes effect within a second.
//
// Long steps (fits, grid chunks, sampling) run on `size` compute workers;
// short ones (reading files, edits, plot curves, merges, exports) on one extra
// light worker, so the page stays usable while a long step runs.

import { PROTOCOL_VERSION, type Progress, type Reply, type Request } from "./protocol";

const CANCEL_GRACE_MS = 400;

/** Steps that take milliseconds: they run on the light worker. */
const LIGHT_STEPS = new Set(["info", "notebook-new", "notebook-decode", "notebook-encode", "describe", "link-encode", "link-decode", "attach", "preview", "parse", "edit", "mask", "grid-merge", "curves", "export", "coords", "physical"]);

export interface JobResult<T> {
  kind: "result" | "cancelled";
  result: T | undefined; // partial when cancelled (may be undefined)
  elapsedMs: number;
}

export interface Job<T> {
  id: number;
  done: Promise<JobResult<T>>;
  cancel(): void;
}

interface Slot {
  worker: Worker;
  ready: Promise<string[]>;
  busy: boolean;
  jobs: Map<number, Pending>;
}

interface Pending {
  resolve(r: JobResult<unknown>): void;
  reject(e: Error): void;
  onProgress?: (p: Progress, elapsedMs: number) => void;
  lastPartial?: unknown;
  settled: boolean;
}

export class EnginePool {
  private slots: Slot[] = [];
  private light: Slot[] = [];
  private nextId = 1;
  private queue: Array<() => void> = [];
  private lightQueue: Array<() => void> = [];
  /** Every request sent, in order (the end-to-end test replays them natively). */
  readonly log: Request[] = [];
  /** Final result of each finished request by id (the end-to-end test compares them with native runs). */
  readonly results = new Map<number, { kind: string; result: unknown }>();
  steps: string[] = [];

  constructor(readonly size: number) {
    this.light.push(this.spawn());
    // Compute workers start once the light one runs: compiling several wasm
    // instances at once would delay the first one, and with it the page's
    // first interactive moment, on a machine with few cores.
    const startCompute = () => {
      for (let i = 0; i < size; i++) this.slots.push(this.spawn());
      for (const f of this.queue.splice(0)) f(); // each takes a worker or queues again
    };
    this.light[0].ready.then(startCompute, startCompute);
  }

  static defaultSize(): number {
    return Math.max(1, (navigator.hardwareConcurrency || 2) - 1);
  }

  /** Resolves with the step names the engine offers, once the first worker runs. */
  async ready(): Promise<string[]> {
    this.steps = await this.light[0].ready;
    return this.steps;
  }

  has(step: string): boolean {
    return this.steps.includes(step);
  }

  private spawn(): Slot {
    const worker = new Worker("worker.js");
    const slot: Slot = { worker, busy: false, jobs: new Map(), ready: Promise.resolve([]) };
    slot.ready = new Promise((resolve, reject) => {
      worker.onmessage = (e: MessageEvent) => {
        const m = e.data as Reply & { steps?: string[] };
        if ((m.kind as string) === "ready") {
          resolve(m.steps ?? []);
          return;
        }
        if (m.kind === "error" && m.id === 0) {
          reject(new Error(m.error));
          return;
        }
        this.onReply(slot, m);
      };
      worker.onerror = (e) => reject(new Error("worker error: " + e.message));
    });
    slot.ready.catch(() => {});
    return slot;
  }

  private onReply(slot: Slot, m: Reply): void {
    const p = slot.jobs.get(m.id);
    if (!p || p.settled) return;
    switch (m.kind) {
      case "progress":
        if (m.progress?.partial !== undefined) p.lastPartial = m.progress.partial;
        p.onProgress?.(m.progress!, m.elapsed_ms);
        return;
      case "result":
      case "cancelled":
        p.settled = true;
        slot.jobs.delete(m.id);
        this.results.set(m.id, { kind: m.kind, result: m.result });
        p.resolve({ kind: m.kind, result: m.result ?? p.lastPartial, elapsedMs: m.elapsed_ms });
        break;
      case "error":
        p.settled = true;
        slot.jobs.delete(m.id);
        p.reject(new Error(m.error || "engine error"));
        break;
    }
    this.release(slot);
  }

  private release(slot: Slot): void {
    slot.busy = false;
    const next = (this.light.includes(slot) ? this.lightQueue : this.queue).shift();
    if (next) next();
  }

  private acquire(light: boolean): Promise<Slot> {
    const slots = light ? this.light : this.slots;
    const queue = light ? this.lightQueue : this.queue;
    return new Promise((resolve) => {
      const tryTake = () => {
        const s = slots.find((x) => !x.busy);
        if (!s) {
          queue.push(tryTake);
          return;
        }
        s.busy = true;
        resolve(s);
      };
      tryTake();
    });
  }

  /** Runs one step on a free worker. */
  run<T>(step: string, settings: unknown, onProgress?: (p: Progress, elapsedMs: number) => void): Job<T> {
    const id = this.nextId++;
    const req: Request = { v: PROTOCOL_VERSION, id, step, settings };
    this.log.push(req);
    let slotRef: Slot | undefined;
    let pend: Pending | undefined;
    let cancelled = false;
    const done = new Promise<JobResult<T>>((resolve, reject) => {
      this.acquire(LIGHT_STEPS.has(step)).then(async (slot) => {
        slotRef = slot;
        pend = { resolve: resolve as (r: JobResult<unknown>) => void, reject, onProgress, settled: false };
        if (cancelled) {
          pend.settled = true;
          this.release(slot);
          resolve({ kind: "cancelled", result: undefined, elapsedMs: 0 });
          return;
        }
        try {
          await slot.ready;
        } catch (e) {
          pend.settled = true;
          this.release(slot);
          reject(e as Error);
          return;
        }
        slot.jobs.set(id, pend);
        slot.worker.postMessage(req);
      });
    });
    const cancel = () => {
      cancelled = true;
      const slot = slotRef;
      const p = pend;
      if (!slot || !p || p.settled) return;
      slot.worker.postMessage({ v: PROTOCOL_VERSION, kind: "cancel", id });
      setTimeout(() => {
        if (p.settled) return;
        // The engine did not answer in time: stop the worker outright and keep
        // the last partial result it reported.
        p.settled = true;
        slot.jobs.delete(id);
        slot.worker.terminate();
        const list = this.light.includes(slot) ? this.light : this.slots;
        const fresh = this.spawn();
        list[list.indexOf(slot)] = fresh;
        p.resolve({ kind: "cancelled", result: p.lastPartial, elapsedMs: NaN });
        const next = (list === this.light ? this.lightQueue : this.queue).shift();
        if (next) next();
      }, CANCEL_GRACE_MS);
    };
    return { id, done, cancel };
  }
}
