// Extracts file facts on worker threads (`--jobs N`); the main thread keeps the workspace and runs the rules.
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { Worker } from 'node:worker_threads';
import type { FileFacts } from '../engine/facts';
import type { FactsRequest, FactsResponse } from './worker';

export function defaultJobs(): number {
  return Math.max(1, typeof os.availableParallelism === 'function' ? os.availableParallelism() : os.cpus().length);
}

/** The bundled worker beside the bundled CLI (dist/worker.js); undefined when running from source. */
export function workerScript(): string | undefined {
  const p = path.join(__dirname, 'worker.js');
  return fs.existsSync(p) ? p : undefined;
}

/** Roughly equal batches by text length, in input order, so results can be put back in place. */
function batches(texts: readonly string[], target: number): number[][] {
  const out: number[][] = [];
  let cur: number[] = [];
  let size = 0;
  texts.forEach((t, i) => {
    cur.push(i);
    size += t.length;
    if (size >= target) {
      out.push(cur);
      cur = [];
      size = 0;
    }
  });
  if (cur.length) out.push(cur);
  return out;
}

/**
 * Facts for every text, in order, computed by `jobs` worker threads. Each batch is handed to the next idle
 * worker; the answer for text i is always extractFacts(text i), so the result does not depend on scheduling.
 */
export async function extractInWorkers(texts: readonly string[], jobs: number, script: string, onProgress?: (done: number) => void): Promise<FileFacts[]> {
  const result: FileFacts[] = new Array(texts.length);
  const total = texts.reduce((n, t) => n + t.length, 0);
  const queue = batches(texts, Math.max(64 * 1024, Math.min(1024 * 1024, Math.ceil(total / (jobs * 8)))));
  const n = Math.min(jobs, queue.length);
  if (!n) return result;
  let done = 0;
  let next = 0;
  const workers: Worker[] = [];
  try {
    await new Promise<void>((resolve, reject) => {
      let finished = 0;
      const pending = new Map<number, number[]>();
      const feed = (w: Worker) => {
        if (next >= queue.length) {
          finished++;
          if (finished === n) resolve();
          return;
        }
        const id = next++;
        pending.set(id, queue[id]);
        const req: FactsRequest = { id, texts: queue[id].map((i) => texts[i]) };
        w.postMessage(req);
      };
      for (let k = 0; k < n; k++) {
        const w = new Worker(script, { workerData: { wasmDir: __dirname } });
        workers.push(w);
        w.on('message', (res: FactsResponse) => {
          if (res.id >= 0) {
            if (res.error || !res.facts) return reject(new Error(`worker failed: ${res.error ?? 'no facts'}`));
            const idx = pending.get(res.id)!;
            pending.delete(res.id);
            idx.forEach((i, j) => (result[i] = res.facts![j]));
            done += idx.length;
            onProgress?.(done);
          }
          feed(w);
        });
        w.on('error', reject);
        w.on('exit', (code) => {
          if (code !== 0) reject(new Error(`worker exited with code ${code}`));
        });
      }
    });
  } finally {
    await Promise.all(workers.map((w) => w.terminate()));
  }
  return result;
}
