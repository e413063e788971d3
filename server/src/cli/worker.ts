// A scanner worker thread: extracts facts for batches of files; when asked, also loads the whole workspace and checks a share.
import { parentPort, workerData } from 'node:worker_threads';
import * as v8 from 'node:v8';
import { loadPythonParser } from '../engine/parser';
import { extractFacts, type FileFacts } from '../engine/facts';
import { Engine } from '../engine/engine';
import { Views } from '../engine/views';
import type { SourceFile } from '../engine/source';
import type { EngineOptions, Finding } from '../engine/types';
import { RULES } from '../../../rules/index';

/** Facts travel as one v8-serialised buffer per batch: cheaper to send than a structured clone of many small objects. */
export type WorkerRequest =
  | { type: 'facts'; id: number; texts: string[] }
  | { type: 'load'; id: number; sources: SourceFile[]; facts: Uint8Array[]; data: { rel: string; text: string }[]; options: EngineOptions }
  | { type: 'analyze'; id: number; targets: string[] };

export type WorkerResponse =
  | { type: 'ready'; id: -1 }
  | { type: 'facts'; id: number; facts: Uint8Array }
  | { type: 'loaded'; id: number }
  | { type: 'analyzed'; id: number; findings: Finding[][] }
  | { type: 'error'; id: number; error: string };

async function serve(): Promise<void> {
  const parser = await loadPythonParser((workerData as { wasmDir?: string } | undefined)?.wasmDir);
  const port = parentPort!;
  let engine: Engine | undefined;
  let views: Views | undefined;
  port.on('message', (req: WorkerRequest) => {
    let res: WorkerResponse;
    try {
      if (req.type === 'facts') {
        res = { type: 'facts', id: req.id, facts: v8.serialize(req.texts.map((t) => extractFacts(parser, t))) };
      } else if (req.type === 'load') {
        engine = new Engine(parser, RULES);
        engine.configure(req.options);
        for (const d of req.data) engine.setDataFile(d.rel, d.text);
        const all = req.facts.flatMap((b) => v8.deserialize(b) as FileFacts[]);
        req.sources.forEach((s, i) => engine!.setFileFacts(s, all[i]));
        views = new Views(engine.ws);
        res = { type: 'loaded', id: req.id };
      } else {
        if (!engine || !views) throw new Error('analyze before load');
        const e = engine;
        const v = views;
        res = { type: 'analyzed', id: req.id, findings: req.targets.map((p) => e.analyze([p], v)) };
      }
    } catch (err) {
      res = { type: 'error', id: req.id, error: err instanceof Error ? err.stack ?? err.message : String(err) };
    }
    port.postMessage(res);
  });
  port.postMessage({ type: 'ready', id: -1 } satisfies WorkerResponse);
}

if (parentPort) void serve();
