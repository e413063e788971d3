// A protocol client for tests: starts the built dist/server.js over stdio and drives it with vscode-languageserver-protocol.
import { spawn, type ChildProcess } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { pathToFileURL } from 'node:url';
import {
  createProtocolConnection,
  ExitNotification,
  InitializeRequest,
  ShutdownRequest,
  InitializedNotification,
  PublishDiagnosticsNotification,
  StreamMessageReader,
  StreamMessageWriter,
  type ClientCapabilities,
  type ProtocolConnection,
  type PublishDiagnosticsParams,
  type ResponseMessage,
  type TextEdit,
  type WorkspaceEdit,
} from 'vscode-languageserver-protocol/node';

export const ROOT = path.resolve(__dirname, '..', '..');
export const SERVER = path.join(ROOT, 'dist', 'server.js');

export function requireBuiltServer(): void {
  if (!fs.existsSync(SERVER)) throw new Error(`${SERVER} is missing: run \`npm run build\` first (npm test does)`);
}

/** A fresh copy of a sample project in a temporary folder, so edits never touch the repository. */
export function copySample(name: string): string {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'regwise-lsp-'));
  const dest = path.join(dir, name);
  fs.cpSync(path.join(ROOT, 'samples', name), dest, { recursive: true });
  return dest;
}

export function uriOf(p: string): string {
  return pathToFileURL(p).href;
}

/** Position of an offset, counted in UTF-16 code units as the protocol does. */
export function positionOf(text: string, offset: number): { line: number; character: number } {
  const before = text.slice(0, offset);
  const line = before.split('\n').length - 1;
  return { line, character: offset - (before.lastIndexOf('\n') + 1) };
}

/** The range of the `nth` occurrence of `needle` in `text` (0-based), failing loudly when absent. */
export function rangeOf(text: string, needle: string, nth = 0): { start: { line: number; character: number }; end: { line: number; character: number } } {
  let at = -1;
  for (let i = 0; i <= nth; i++) {
    at = text.indexOf(needle, at + 1);
    if (at < 0) throw new Error(`fixture has no occurrence ${nth} of ${JSON.stringify(needle)}`);
  }
  return { start: positionOf(text, at), end: positionOf(text, at + needle.length) };
}

function offsetOf(text: string, p: { line: number; character: number }): number {
  const lines = text.split('\n');
  let o = 0;
  for (let i = 0; i < p.line; i++) o += lines[i].length + 1;
  return o + p.character;
}

/** Applies protocol text edits (all against the same text) the way an editor does. */
export function applyTextEdits(text: string, edits: readonly TextEdit[]): string {
  const sorted = [...edits].map((e) => ({ s: offsetOf(text, e.range.start), e: offsetOf(text, e.range.end), t: e.newText })).sort((a, b) => b.s - a.s);
  let out = text;
  for (const e of sorted) out = out.slice(0, e.s) + e.t + out.slice(e.e);
  return out;
}

export function editsFor(edit: WorkspaceEdit | undefined, uri: string): TextEdit[] {
  return edit?.changes?.[uri] ?? [];
}

export interface StartOptions {
  root?: string;
  capabilities?: ClientCapabilities;
  initializationOptions?: unknown;
  /** Answers workspace/configuration requests (section → value). */
  configuration?: Record<string, unknown>;
}

export class TestClient {
  readonly diagnostics = new Map<string, PublishDiagnosticsParams[]>();
  readonly progress: unknown[] = [];
  readonly serverRequests: string[] = [];
  readonly logs: string[] = [];
  readonly rawResponses = new Map<string, ResponseMessage>();
  private listeners: (() => void)[] = [];

  private constructor(readonly proc: ChildProcess, readonly conn: ProtocolConnection) {}

  static async start(opts: StartOptions = {}): Promise<{ client: TestClient; init: Awaited<ReturnType<ProtocolConnection['sendRequest']>> }> {
    requireBuiltServer();
    const proc = spawn(process.execPath, [SERVER, '--stdio'], { stdio: ['pipe', 'pipe', 'pipe'] });
    const conn = createProtocolConnection(new StreamMessageReader(proc.stdout!), new StreamMessageWriter(proc.stdin!));
    const client = new TestClient(proc, conn);
    proc.stderr!.on('data', (d: Buffer) => client.logs.push(d.toString()));
    conn.onNotification(PublishDiagnosticsNotification.type, (p) => {
      const list = client.diagnostics.get(p.uri) ?? [];
      list.push(p);
      client.diagnostics.set(p.uri, list);
      client.notify();
    });
    conn.onNotification('$/progress', (p) => {
      client.progress.push(p);
      client.notify();
    });
    conn.onNotification('window/logMessage', (p: { message: string }) => client.logs.push(p.message));
    conn.onNotification('window/showMessage', (p: { message: string }) => client.logs.push(`show: ${p.message}`));
    const answer = (method: string, params: unknown) => {
      client.serverRequests.push(method);
      client.notify();
      if (method === 'workspace/configuration') {
        const items = (params as { items: { section?: string }[] }).items;
        return items.map((i) => (i.section ? opts.configuration?.[i.section] ?? null : null));
      }
      return null;
    };
    for (const m of ['workspace/configuration', 'window/workDoneProgress/create', 'client/registerCapability', 'workspace/diagnostic/refresh', 'window/showMessageRequest']) {
      conn.onRequest(m, (params: unknown) => answer(m, params));
    }
    // a second reader on the same output sees the answers to frames written raw (ids the connection never issued)
    new StreamMessageReader(proc.stdout!).listen((m) => {
      const id = (m as ResponseMessage).id;
      if (typeof id === 'string' && id.startsWith('raw-') && !('method' in m)) {
        client.rawResponses.set(id, m as ResponseMessage);
        client.notify();
      }
    });
    conn.listen();
    const init = await conn.sendRequest(InitializeRequest.type, {
      processId: process.pid,
      rootUri: opts.root ? uriOf(opts.root) : null,
      workspaceFolders: opts.root ? [{ uri: uriOf(opts.root), name: path.basename(opts.root) }] : null,
      capabilities: opts.capabilities ?? {},
      initializationOptions: opts.initializationOptions,
    });
    await conn.sendNotification(InitializedNotification.type, {});
    return { client, init };
  }

  /** Writes messages as one buffer (one write, so the server reads them together), ids prefixed `raw-`. */
  writeRaw(messages: object[]): void {
    const frames = messages.map((m) => {
      const body = Buffer.from(JSON.stringify({ jsonrpc: '2.0', ...m }), 'utf8');
      return Buffer.concat([Buffer.from(`Content-Length: ${body.length}\r\n\r\n`, 'ascii'), body]);
    });
    this.proc.stdin!.write(Buffer.concat(frames));
  }

  rawResponse(id: string): Promise<ResponseMessage> {
    return this.waitFor(`raw response ${id}`, () => this.rawResponses.get(id));
  }

  private notify(): void {
    for (const l of [...this.listeners]) l();
  }

  /** Resolves when `pred` holds, re-checked on every message from the server; rejects after `ms`. */
  waitFor<T>(what: string, pred: () => T | undefined | false, ms = 20000): Promise<T> {
    return new Promise((resolve, reject) => {
      const check = () => {
        const v = pred();
        if (v) {
          done();
          resolve(v);
        }
      };
      const timer = setTimeout(() => {
        done();
        reject(new Error(`timed out waiting for ${what}; server said:\n${this.logs.join('')}`));
      }, ms);
      const done = () => {
        clearTimeout(timer);
        this.listeners = this.listeners.filter((l) => l !== check);
      };
      this.listeners.push(check);
      check();
    });
  }

  /** The first diagnostics published for `uri` with the given version (any version when omitted). */
  diagnosticsOf(uri: string, version?: number): Promise<PublishDiagnosticsParams> {
    return this.waitFor(`diagnostics for ${uri} v${version ?? '*'}`, () => this.diagnostics.get(uri)?.find((d) => version === undefined || d.version === version));
  }

  async stop(): Promise<void> {
    try {
      await Promise.race([this.conn.sendRequest(ShutdownRequest.type), new Promise((r) => setTimeout(r, 3000))]);
      await this.conn.sendNotification(ExitNotification.type);
    } catch {
      // already gone
    }
    this.conn.dispose();
    if (this.proc.exitCode === null) {
      await Promise.race([new Promise((r) => this.proc.once('exit', r)), new Promise((r) => setTimeout(r, 2000))]);
      if (this.proc.exitCode === null) this.proc.kill();
    }
  }
}

export function readFile(p: string): string {
  return fs.readFileSync(p, 'utf8');
}

/** A temporary workspace with the given files. */
export function makeWorkspace(files: Record<string, string>): string {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'regwise-ws-'));
  for (const [rel, text] of Object.entries(files)) {
    fs.mkdirSync(path.dirname(path.join(dir, rel)), { recursive: true });
    fs.writeFileSync(path.join(dir, rel), text);
  }
  return dir;
}
