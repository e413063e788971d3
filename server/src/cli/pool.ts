// `--jobs N`: worker threads extract facts for batches of files; optionally each also loads the workspace and checks a share.
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import * as v8 from 'node:v8';
import { Worker } from 'node:worker_threads';
import type { FileFacts } from '../engine/facts';
import type { SourceFile } from '../engine/source';
import type { EngineOptions, Finding } from '../engine/types';
import type { WorkerRequest, WorkerResponse } from './worker';

export function defaultJobs(): number {
  return Math.max(1, typeof os.availableParallelism === 'function' ? os.availableParallelism() : os.cpus().length);
}

/** The bundled worker beside the bundled CLI (dist/worker.js); undefined when running from source. */
export function workerScript(): string | undefined {
  const p = path.join(__dirname, 'worker.js');
  return fs.existsSync(p) ? p : undefined;
}

/** Consecutive batches of roughly `target` characters, so results can be put back in input order. */
function batches(sizes: readonly number[], target: number): number[][] {
  const out: number[][] = [];
  let cur: number[] = [];
  let size = 0;
  sizes.forEach((n, i) => {
    cur.push(i);
    size += n;
    if (size >= target) {
      out.push(cur);
      cur = [];
      size = 0;
    }
  });
  if (cur.length) out.push(cur);
  return out;
}

type WithoutId<T> = T extends unknown ? Omit<T, 'id'> : never;

type Pending = { resolve: (r: WorkerResponse) => void; reject: (e: Error) => void };

class Pool {
  private readonly workers: Worker[] = [];
  private readonly waiting = new Map<Worker, Pending>();
  private readonly ready: Promise<void>[] = [];
  private nextId = 0;
  private failed: Error | undefined;

  constructor(script: string, n: number) {
    for (let k = 0; k < n; k++) {
      const w = new Worker(script, { workerData: { wasmDir: __dirname } });
      this.workers.push(w);
      this.ready.push(new Promise((resolve, reject) => {
        w.once('message', (m: WorkerResponse) => (m.type === 'ready' ? resolve() : reject(new Error('worker did not start'))));
        w.once('error', reject);
      }));
      w.on('error', (e) => this.fail(e instanceof Error ? e : new Error(String(e))));
      w.on('exit', (code) => {
        if (code !== 0 && !this.closing) this.fail(new Error(`worker exited with code ${code}`));
      });
    }
  }

  private closing = false;

  private fail(e: Error): void {
    this.failed ??= e;
    for (const p of this.waiting.values()) p.reject(e);
    this.waiting.clear();
  }

  get size(): number {
    return this.workers.length;
  }

  async start(): Promise<void> {
    await Promise.all(this.ready);
  }

  /** One request to one worker; the worker answers requests in order, one at a time. */
  ask(k: number, req: WithoutId<WorkerRequest>): Promise<WorkerResponse> {
    if (this.failed) return Promise.reject(this.failed);
    const w = this.workers[k];
    const id = this.nextId++;
    return new Promise((resolve, reject) => {
      const onMessage = (m: WorkerResponse) => {
        if (m.id !== id) return;
        w.off('message', onMessage);
        this.waiting.delete(w);
        if (m.type === 'error') reject(new Error(`worker failed: ${m.error}`));
        else resolve(m);
      };
      this.waiting.set(w, { resolve, reject });
      w.on('message', onMessage);
      w.postMessage({ ...req, id } as WorkerRequest);
    });
  }

  /** Runs `jobs` through the workers, each job to the next idle worker. */
  async each<T>(jobs: readonly T[], run: (k: number, job: T) => Promise<void>): Promise<void> {
    let next = 0;
    await Promise.all(this.workers.map(async (_w, k) => {
      while (next < jobs.length) await run(k, jobs[next++]);
    }));
  }

  async close(): Promise<void> {
    this.closing = true;
    await Promise.all(this.workers.map((w) => w.terminate()));
  }
}

/**
 * Facts of every text, in input order, extracted by up to `jobs` workers; each batch goes to the next idle worker.
 * The facts of text i are extractFacts(text i) whichever worker made them, so the result does not depend on scheduling.
 */
export async function factsInWorkers(script: string, jobs: number, texts: readonly string[], onProgress?: (done: number) => void): Promise<{ facts: FileFacts[]; workers: number }> {
  const total = texts.reduce((n, t) => n + t.length, 0);
  const factBatches = batches(texts.map((t) => t.length), Math.max(8 * 1024, Math.min(1024 * 1024, Math.ceil(total / (jobs * 8)))));
  const pool = new Pool(script, Math.max(1, Math.min(jobs, factBatches.length)));
  try {
    await pool.start();
    const facts: FileFacts[] = new Array(texts.length);
    let done = 0;
    await pool.each(factBatches, async (k, b) => {
      const r = await pool.ask(k, { type: 'facts', texts: b.map((j) => texts[j]) });
      if (r.type !== 'facts') throw new Error('unexpected worker answer');
      const list = v8.deserialize(r.facts) as FileFacts[];
      b.forEach((j, i) => (facts[j] = list[i]));
      done += b.length;
      onProgress?.(done);
    });
    return { facts, workers: pool.size };
  } finally {
    await pool.close();
  }
}

/**
 * Opt-in (REGWISE_PARALLEL=rules): the rule checks spread over the workers too. Each worker then holds the whole
 * workspace and the views build their workspace-wide indexes once per worker, so memory grows with N and the repeated
 * work eats the gain (benchmark on 2 shared cores with the rules of 2026-12-01: 0.83x at 100k lines, 0.68x at 250k,
 * 0.49x at 500k, with 1.7-1.9x the peak memory). Not the default until the per-file checks outweigh the views' shared work.
 *
 * Extracts facts in the workers, loads the full workspace into each, and analyses `targets` spread over them: per target
 * path, in the order given, what `engine.analyze([path], views)` returns. Every answer is a pure function of the
 * workspace and the target, so scheduling cannot change the result.
 */
export async function analyzeInWorkers(
  script: string,
  jobs: number,
  sources: readonly SourceFile[],
  data: readonly { rel: string; text: string }[],
  options: EngineOptions,
  targets: readonly string[],
  onProgress?: (phase: string, done: number, total: number) => void,
): Promise<{ findings: Finding[][]; workers: number }> {
  const total = sources.reduce((n, s) => n + s.text.length, 0);
  const factBatches = batches(sources.map((s) => s.text.length), Math.max(8 * 1024, Math.min(1024 * 1024, Math.ceil(total / (jobs * 8)))));
  const pool = new Pool(script, Math.max(1, Math.min(jobs, factBatches.length)));
  try {
    await pool.start();
    const buffers: Uint8Array[] = new Array(factBatches.length);
    let parsed = 0;
    await pool.each(factBatches.map((b, i) => ({ b, i })), async (k, { b, i }) => {
      const r = await pool.ask(k, { type: 'facts', texts: b.map((j) => sources[j].text) });
      if (r.type !== 'facts') throw new Error('unexpected worker answer');
      buffers[i] = r.facts;
      parsed += b.length;
      onProgress?.('parsing', parsed, sources.length);
    });
    // every worker gets the whole workspace: rules see cross-file facts exactly as a single thread would
    const loaded = Array.from({ length: pool.size }, (_, k) => pool.ask(k, { type: 'load', sources: [...sources], facts: buffers, data: [...data], options }));
    buffers.length = 0; // postMessage copied them; the main thread keeps no facts
    await Promise.all(loaded);
    const findings: Finding[][] = new Array(targets.length);
    const chunk = Math.max(1, Math.ceil(targets.length / (pool.size * 16)));
    const chunks: number[][] = [];
    for (let i = 0; i < targets.length; i += chunk) chunks.push(Array.from({ length: Math.min(chunk, targets.length - i) }, (_, j) => i + j));
    let checked = 0;
    await pool.each(chunks, async (k, idx) => {
      const r = await pool.ask(k, { type: 'analyze', targets: idx.map((i) => targets[i]) });
      if (r.type !== 'analyzed') throw new Error('unexpected worker answer');
      idx.forEach((i, j) => (findings[i] = r.findings[j]));
      checked += idx.length;
      onProgress?.('analysing', checked, targets.length);
    });
    return { findings, workers: pool.size };
  } finally {
    await pool.close();
  }
}
