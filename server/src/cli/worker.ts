// A scanner worker thread: parses program texts and extracts their facts (plain data) for the main thread.
import { parentPort, workerData } from 'node:worker_threads';
import { loadPythonParser } from '../engine/parser';
import { extractFacts, type FileFacts } from '../engine/facts';

export interface FactsRequest {
  id: number;
  texts: string[];
}

export interface FactsResponse {
  id: number;
  facts?: FileFacts[];
  error?: string;
}

async function serve(): Promise<void> {
  const parser = await loadPythonParser((workerData as { wasmDir?: string } | undefined)?.wasmDir);
  parentPort!.on('message', (req: FactsRequest) => {
    let res: FactsResponse;
    try {
      res = { id: req.id, facts: req.texts.map((t) => extractFacts(parser, t)) };
    } catch (err) {
      res = { id: req.id, error: err instanceof Error ? err.stack ?? err.message : String(err) };
    }
    parentPort!.postMessage(res);
  });
  parentPort!.postMessage({ id: -1 });
}

if (parentPort) void serve();
