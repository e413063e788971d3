// The language server: keeps the Engine's workspace in step with the editor, schedules analysis, and answers
// diagnostics (push or pull), code actions, hover and the extension's own requests.
import * as fs from 'node:fs';
import * as nodePath from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import {
  CodeActionKind,
  DidChangeWatchedFilesNotification,
  DocumentDiagnosticReportKind,
  LSPErrorCodes,
  ResponseError,
  TextDocumentSyncKind,
  type CancellationToken,
  type CodeAction,
  type CodeActionParams,
  type Connection,
  type Diagnostic,
  type DocumentDiagnosticReport,
  type Hover,
  type HoverParams,
  type InitializeParams,
  type InitializeResult,
  type Location,
  type WorkspaceDiagnosticReport,
  type WorkspaceDocumentDiagnosticReport,
  type WorkspaceEdit,
} from 'vscode-languageserver/node';
import { Engine } from '../engine/engine';
import type { PythonParser } from '../engine/parser';
import type { Rule } from '../engine/rule';
import { Views } from '../engine/views';
import { chooseFixes, applyFixesOnce, fixUntilStable } from '../engine/fix';
import type { EngineOptions, Finding } from '../engine/types';
import { discoverConfig, engineOptions, loadConfig } from '../cli/config';
import { show } from '../engine/values';
import { DATA_EXT, MAX_FILE_BYTES, SOURCE_EXT, toPosix, walk } from '../cli/load';
import { LineIndex, NotebookDocument, PythonDocument, applyContentChanges, type Cell } from './documents';
import { findingKey, rangesOverlap, toDiagnostic, toWorkspaceChanges, type DiagnosticData, type Locator } from './convert';
import { parseSettings, DEFAULT_SETTINGS, type Settings } from './settings';
import { hoverMarkdown } from './hover';

export const FIX_ALL_KIND = 'source.fixAll.regwise';
/** An edit this soon after the previous one is part of a burst: wait this long after it (a newer edit restarts the wait). */
export const DEFAULT_DEBOUNCE_MS = 20;
/** Files loaded per turn of the event loop while building the workspace model, so requests stay answered. */
const LOAD_CHUNK = 25;
/** Bound on the importers analysed with a file (a module imported everywhere would otherwise pull in the workspace). */
const MAX_DEPENDENTS = 64;

interface Result {
  gen: number;
  version: number;
  findings: Finding[];
}

type Owner = { kind: 'py'; doc: PythonDocument } | { kind: 'nb'; nb: NotebookDocument };

export interface ServerOptions {
  debounceMs?: number;
}

export class RegwiseServer {
  readonly engine: Engine;
  private readonly docs = new Map<string, PythonDocument>();
  private readonly notebooks = new Map<string, NotebookDocument>();
  private readonly cellOwner = new Map<string, NotebookDocument>();
  private readonly byPath = new Map<string, Owner>();
  private readonly uriByPath = new Map<string, string>();
  private readonly pathByUri = new Map<string, string>();
  private readonly results = new Map<string, Result>();
  /** Per path, the cancel function of the analysis scheduled after its last edit. */
  private readonly timers = new Map<string, () => void>();
  /** Per path, when its last edit arrived (performance.now()): tells an edit after a pause from one in a burst. */
  private readonly lastEdit = new Map<string, number>();
  /** Bumped on every change to the workspace model or the settings; results of older generations are stale. */
  private gen = 0;
  private views: { gen: number; views: Views } | undefined;
  private round = 0;
  private root: { kind: 'file'; dir: string } | { kind: 'virtual'; uri: string } | undefined;
  private pull = false;
  private refreshSupport = false;
  private progressSupport = false;
  private configSupport = false;
  private watchRegistration = false;
  private settings: Settings = DEFAULT_SETTINGS;
  private debounceMs: number;
  private workspaceLoaded = false;
  /** Set by the scan-workspace request: report every workspace file, not only open ones. */
  private scanAll = false;
  private wsReport: { gen: number; items: WorkspaceDocumentDiagnosticReport[] } | undefined;

  constructor(private readonly conn: Connection, parser: PythonParser, private readonly rules: readonly Rule[], opts: ServerOptions = {}) {
    this.engine = new Engine(parser, rules);
    this.debounceMs = opts.debounceMs ?? DEFAULT_DEBOUNCE_MS;
    this.wire();
  }

  private get parser(): PythonParser {
    return this.engine.parser;
  }

  log(msg: string): void {
    this.conn.console.log(`[regwise] ${msg}`);
  }

  private logError(where: string, err: unknown): void {
    this.conn.console.error(`[regwise] ${where} failed: ${err instanceof Error ? err.stack ?? err.message : String(err)}`);
  }

  /** Wraps a handler so an exception is logged and answered, never fatal. */
  private guard<P extends unknown[], R>(where: string, fallback: R, fn: (...a: P) => R | Promise<R>): (...a: P) => Promise<R> {
    return async (...a: P) => {
      try {
        return await fn(...a);
      } catch (err) {
        if (err instanceof ResponseError) throw err;
        this.logError(where, err);
        return fallback;
      }
    };
  }

  /**
   * A request handler that first yields one turn, so a cancellation sent right after the request is seen before
   * any work starts; then the work runs to completion (analysis is synchronous and short).
   */
  private cancellable<P, R>(where: string, fallback: R, fn: (p: P, token: CancellationToken) => R | Promise<R>): (p: P, token: CancellationToken) => Promise<R> {
    return this.guard(where, fallback, async (p: P, token: CancellationToken) => {
      await new Promise((r) => setImmediate(r));
      if (token.isCancellationRequested) throw new ResponseError(LSPErrorCodes.RequestCancelled, `${where} cancelled`);
      return fn(p, token);
    });
  }

  private wire(): void {
    const c = this.conn;
    c.onInitialize((p) => this.initialize(p));
    c.onInitialized(this.guard('initialized', undefined, () => this.initialized()));
    c.onDidOpenTextDocument(this.guard('didOpen', undefined, (p) => this.openText(p.textDocument.uri, p.textDocument.languageId, p.textDocument.version, p.textDocument.text)));
    c.onDidChangeTextDocument(this.guard('didChange', undefined, (p) => this.changeText(p.textDocument.uri, p.textDocument.version, p.contentChanges)));
    c.onDidCloseTextDocument(this.guard('didClose', undefined, (p) => this.closeText(p.textDocument.uri)));
    c.onDidSaveTextDocument(this.guard('didSave', undefined, () => undefined));
    c.notebooks.synchronization.onDidOpenNotebookDocument(this.guard('notebookDidOpen', undefined, (p) => {
      const nb = new NotebookDocument(p.notebookDocument.uri, this.pathOf(p.notebookDocument.uri), p.notebookDocument.version);
      const texts = new Map(p.cellTextDocuments.map((d) => [d.uri, d]));
      nb.cells = p.notebookDocument.cells.map((cell) => {
        const d = texts.get(cell.document);
        return makeCell(cell.document, cell.kind === 2 ? 'code' : 'other', d?.languageId ?? 'python', d?.version ?? 0, d?.text ?? '');
      });
      this.notebooks.set(nb.uri, nb);
      for (const cell of nb.cells) this.cellOwner.set(cell.uri, nb);
      this.byPath.set(nb.path, { kind: 'nb', nb });
      this.remember(nb.path, nb.uri);
      this.syncNotebook(nb);
    }));
    c.notebooks.synchronization.onDidChangeNotebookDocument(this.guard('notebookDidChange', undefined, (p) => {
      const nb = this.notebooks.get(p.notebookDocument.uri);
      if (!nb) return;
      nb.version = p.notebookDocument.version;
      const cells = p.change.cells;
      if (cells?.structure) {
        const { start, deleteCount, cells: added } = cells.structure.array;
        const opened = new Map((cells.structure.didOpen ?? []).map((d) => [d.uri, d]));
        const old = new Map(nb.cells.map((x) => [x.uri, x]));
        const fresh = (added ?? []).map((cell) => {
          const d = opened.get(cell.document);
          const prev = old.get(cell.document);
          return makeCell(cell.document, cell.kind === 2 ? 'code' : 'other', d?.languageId ?? prev?.language ?? 'python', d?.version ?? prev?.version ?? 0, d?.text ?? prev?.text ?? '');
        });
        const removed = nb.cells.splice(start, deleteCount, ...fresh);
        for (const r of removed) {
          if (fresh.some((f) => f.uri === r.uri)) continue;
          this.cellOwner.delete(r.uri);
          // a removed cell keeps no squiggles
          this.conn.sendDiagnostics({ uri: r.uri, diagnostics: [] });
        }
        for (const f of fresh) this.cellOwner.set(f.uri, nb);
        for (const closed of cells.structure.didClose ?? []) this.cellOwner.delete(closed.uri);
      }
      for (const d of cells?.data ?? []) {
        const cell = nb.cellByUri(d.document);
        if (cell) cell.kind = d.kind === 2 ? 'code' : 'other';
      }
      for (const t of cells?.textContent ?? []) {
        const cell = nb.cellByUri(t.document.uri);
        if (!cell) continue;
        cell.text = applyContentChanges(cell.text, t.changes);
        cell.lines = new LineIndex(cell.text);
        cell.version = t.document.version;
      }
      nb.changed();
      this.syncNotebook(nb);
    }));
    c.notebooks.synchronization.onDidCloseNotebookDocument(this.guard('notebookDidClose', undefined, (p) => {
      const nb = this.notebooks.get(p.notebookDocument.uri);
      if (!nb) return;
      this.notebooks.delete(nb.uri);
      for (const cell of nb.cells) {
        this.cellOwner.delete(cell.uri);
        this.conn.sendDiagnostics({ uri: cell.uri, diagnostics: [] });
      }
      this.byPath.delete(nb.path);
      this.results.delete(nb.path);
      this.reloadFromDisk(nb.path);
    }));
    c.onDidChangeWatchedFiles(this.guard('didChangeWatchedFiles', undefined, (p) => {
      let any = false;
      for (const ch of p.changes) {
        const path = this.pathOf(ch.uri);
        const base = nodePath.posix.basename(path);
        if (base === 'regwise.toml' || base === 'pyproject.toml') this.loadFileConfig();
        if (this.byPath.has(path)) continue; // the editor's copy wins over the disk while open
        if (ch.type === 3) this.engine.removeFile(path);
        else this.reloadFromDisk(path, false);
        any = true;
      }
      if (any) this.workspaceChanged();
    }));
    c.onDidChangeConfiguration(this.guard('didChangeConfiguration', undefined, async (p) => {
      await this.loadSettings(p.settings);
      this.workspaceChanged();
    }));
    c.onCodeAction(this.cancellable('codeAction', [] as CodeAction[], (p: CodeActionParams) => this.codeActions(p)));
    c.onHover(this.cancellable('hover', null as Hover | null, (p: HoverParams) => this.hover(p)));
    c.languages.diagnostics.on(this.guard('textDocument/diagnostic', { kind: DocumentDiagnosticReportKind.Full, items: [] } as DocumentDiagnosticReport, (p, token) => this.pullDocument(p.textDocument.uri, p.previousResultId, token)));
    c.languages.diagnostics.onWorkspace(this.guard('workspace/diagnostic', { items: [] } as WorkspaceDiagnosticReport, (p, token) => this.pullWorkspace(p.previousResultIds, token)));
    c.onRequest('regwise/applySafeFixes', this.guard('applySafeFixes', null, (p: { uri: string }) => this.fixAllEdit(p.uri) ?? null));
    c.onRequest('regwise/modelStructure', this.guard('modelStructure', null, (p: { uri: string }) => this.modelStructure(p.uri)));
    c.onRequest('regwise/scanWorkspace', this.guard('scanWorkspace', null, () => this.scanWorkspace()));
    c.onRequest('regwise/rules', () => this.rules.map((r) => ({ id: r.meta.id, title: r.meta.title, level: r.meta.level, summary: r.meta.summary })));
    c.onShutdown(() => {
      for (const cancel of this.timers.values()) cancel();
      this.timers.clear();
    });
  }

  // ---------------------------------------------------------------- lifecycle

  private initialize(p: InitializeParams): InitializeResult {
    const folder = p.workspaceFolders?.[0]?.uri ?? p.rootUri ?? (p.rootPath ? pathToFileURL(p.rootPath).href : undefined);
    if (folder) this.root = folder.startsWith('file:') ? { kind: 'file', dir: fileURLToPath(folder) } : { kind: 'virtual', uri: folder.replace(/\/$/, '') };
    const caps = p.capabilities;
    this.pull = !!caps.textDocument?.diagnostic;
    this.refreshSupport = !!caps.workspace?.diagnostics?.refreshSupport;
    this.progressSupport = !!caps.window?.workDoneProgress;
    this.configSupport = !!caps.workspace?.configuration;
    this.watchRegistration = !!caps.workspace?.didChangeWatchedFiles?.dynamicRegistration;
    const init = (p.initializationOptions ?? {}) as { debounceMs?: number; settings?: unknown };
    if (typeof init.debounceMs === 'number' && init.debounceMs >= 0) this.debounceMs = init.debounceMs;
    if (init.settings) this.applySettings(init.settings);
    return {
      capabilities: {
        textDocumentSync: { openClose: true, change: TextDocumentSyncKind.Incremental, save: false },
        // markdown cells are synced too (and analysed as nothing) so cell numbers in messages count every cell, as the editor does
        notebookDocumentSync: { notebookSelector: [{ notebook: { notebookType: 'jupyter-notebook' }, cells: [{ language: 'python' }, { language: 'markdown' }] }] },
        codeActionProvider: { codeActionKinds: [CodeActionKind.QuickFix, FIX_ALL_KIND] },
        hoverProvider: true,
        ...(this.pull ? { diagnosticProvider: { identifier: 'regwise', interFileDependencies: true, workspaceDiagnostics: true } } : {}),
      },
      serverInfo: { name: 'regwise' },
    };
  }

  private async initialized(): Promise<void> {
    this.loadFileConfig();
    if (this.configSupport) await this.loadSettings();
    if (this.watchRegistration) {
      await this.conn.client.register(DidChangeWatchedFilesNotification.type, {
        watchers: [{ globPattern: '**/*.{py,ipynb,yaml,yml,json,toml}' }],
      }).catch((err: unknown) => this.logError('register file watchers', err));
    }
    // the workspace model is built in the background; open documents are analysed meanwhile
    setImmediate(() => void this.loadWorkspace().catch((err: unknown) => this.logError('workspace load', err)));
  }

  private async loadSettings(pushed?: unknown): Promise<void> {
    let raw: unknown = (pushed as { regwise?: unknown } | undefined)?.regwise;
    if (this.configSupport) {
      try {
        raw = await this.conn.workspace.getConfiguration('regwise');
      } catch (err) {
        this.logError('workspace/configuration', err);
      }
    }
    if (raw !== undefined && raw !== null) this.applySettings(raw);
  }

  private applySettings(raw: unknown): void {
    const { settings, problems } = parseSettings(raw, this.rules.map((r) => r.meta.id));
    for (const m of problems) this.conn.window.showWarningMessage(`Regwise: ${m}`);
    this.settings = settings;
    this.configureEngine();
    if (settings.scanWorkspaceOnOpen) this.scanAll = true;
  }

  /** The project's config file (`regwise.toml`, `[tool.regwise]`) is the base; the editor's settings override it. */
  private configureEngine(): void {
    const file = this.fileConfig ?? {};
    const mine = this.settings.engine;
    this.engine.configure({ levels: { ...file.levels, ...mine.levels }, thresholds: { ...file.thresholds, ...mine.thresholds } });
  }

  private fileConfig: EngineOptions | undefined;
  private configProblem: string | undefined;

  /** Reads the config file the scanner would use for the workspace folder; a broken one is reported once and ignored. */
  private loadFileConfig(): void {
    if (this.root?.kind !== 'file') return;
    let problem: string | undefined;
    try {
      const file = discoverConfig(this.root.dir);
      this.fileConfig = file ? engineOptions(loadConfig(file, this.rules.map((r) => r.meta.id), toPosix(nodePath.relative(this.root.dir, file)))) : undefined;
    } catch (err) {
      this.fileConfig = undefined;
      problem = err instanceof Error ? err.message : String(err);
    }
    if (problem && problem !== this.configProblem) this.conn.window.showWarningMessage(`Regwise: config ignored: ${problem}`);
    this.configProblem = problem;
    this.configureEngine();
  }

  /** Reads the workspace folder's sources and data files into the engine, in chunks, reporting progress. */
  private async loadWorkspace(): Promise<void> {
    if (!this.root || this.root.kind !== 'file') {
      this.workspaceLoaded = true;
      return;
    }
    const dir = this.root.dir;
    const started = Date.now();
    const progress = this.progressSupport ? await this.conn.window.createWorkDoneProgress().catch(() => undefined) : undefined;
    progress?.begin('Regwise', 0, 'reading the workspace', false);
    const files = walk([dir]).filter((f) => {
      const ext = nodePath.extname(f).toLowerCase();
      return SOURCE_EXT.includes(ext) || DATA_EXT.includes(ext);
    });
    let n = 0;
    for (let i = 0; i < files.length; i += LOAD_CHUNK) {
      for (const abs of files.slice(i, i + LOAD_CHUNK)) {
        const path = toPosix(nodePath.relative(dir, abs));
        if (!this.byPath.has(path) && this.readIntoEngine(path, abs)) n++;
      }
      // results computed between chunks saw a partial workspace
      this.gen++;
      progress?.report(Math.round(((i + LOAD_CHUNK) / Math.max(1, files.length)) * 100), `${Math.min(i + LOAD_CHUNK, files.length)}/${files.length} files`);
      await new Promise((r) => setImmediate(r));
    }
    progress?.done();
    this.workspaceLoaded = true;
    this.log(`workspace model: ${n} files from ${dir} in ${Date.now() - started} ms`);
    this.workspaceChanged();
  }

  /** Puts one disk file into the engine (source or data file); false when skipped. */
  private readIntoEngine(path: string, abs: string): boolean {
    const ext = nodePath.extname(abs).toLowerCase();
    let buf: Buffer;
    try {
      if (fs.statSync(abs).size > MAX_FILE_BYTES) return false;
      buf = fs.readFileSync(abs);
    } catch {
      return false;
    }
    if (DATA_EXT.includes(ext)) {
      this.engine.setDataFile(path, buf.toString('utf8'));
      return true;
    }
    if (!SOURCE_EXT.includes(ext) || buf.includes(0)) return false;
    let text = buf.toString('utf8');
    if (text.charCodeAt(0) === 0xfeff) text = text.slice(1);
    this.engine.setFile(path, text);
    return true;
  }

  private reloadFromDisk(path: string, announce = true): void {
    const abs = this.absPath(path);
    if (abs && fs.existsSync(abs)) this.readIntoEngine(path, abs);
    else this.engine.removeFile(path);
    if (announce) this.workspaceChanged();
  }

  // ---------------------------------------------------------------- paths

  /** Engine paths: workspace-relative with forward slashes; outside the workspace, the absolute path. */
  pathOf(uri: string): string {
    const cached = this.pathByUri.get(uri);
    if (cached !== undefined) return cached;
    if (uri.startsWith('file:')) {
      const abs = fileURLToPath(uri);
      if (this.root?.kind === 'file') {
        const rel = nodePath.relative(this.root.dir, abs);
        if (rel && !rel.startsWith('..') && !nodePath.isAbsolute(rel)) return toPosix(rel);
      }
      return toPosix(abs);
    }
    if (this.root?.kind === 'virtual' && uri.startsWith(`${this.root.uri}/`)) return decodeURIComponent(uri.slice(this.root.uri.length + 1));
    return uri;
  }

  /** Keeps the editor's spelling of a URI (its percent-encoding may differ from ours). */
  private remember(path: string, uri: string): void {
    this.uriByPath.set(path, uri);
    this.pathByUri.set(uri, path);
  }

  private absPath(path: string): string | undefined {
    if (this.root?.kind === 'file' && !nodePath.isAbsolute(path)) return nodePath.join(this.root.dir, path);
    return nodePath.isAbsolute(path) ? path : undefined;
  }

  uriOf(path: string): string | undefined {
    const known = this.uriByPath.get(path);
    if (known) return known;
    if (this.root?.kind === 'virtual' && !path.includes(':')) return `${this.root.uri}/${path}`;
    const abs = this.absPath(path);
    return abs ? pathToFileURL(abs).href : undefined;
  }

  /** Maps program offsets of an engine path to the editor: open documents, notebook cells, or files on disk. */
  private readonly locator: Locator = {
    locate: (path, start, end) => {
      const owner = this.byPath.get(path);
      if (owner?.kind === 'py') return { uri: owner.doc.uri, range: { start: owner.doc.lines.positionAt(start), end: owner.doc.lines.positionAt(end) } };
      if (owner?.kind === 'nb') {
        const nb = owner.nb;
        const s = nb.lines.positionAt(start);
        const e = nb.lines.positionAt(end);
        const at = nb.cellAtLine(s.line);
        if (!at) return undefined;
        const endLine = Math.min(e.line, at.map.line + at.map.lineCount - 1);
        const endChar = endLine === e.line ? e.character : at.cell.lines.lineText(endLine - at.map.line).length;
        return { uri: at.cell.uri, range: { start: { line: s.line - at.map.line, character: s.character }, end: { line: endLine - at.map.line, character: endChar } } };
      }
      const file = this.engine.ws.get(path);
      const uri = this.uriOf(path);
      const data = file ? undefined : this.engine.ws.dataFiles.get(path);
      if ((!file && !data) || !uri || file?.source.cells) return undefined; // a closed notebook has no cell URIs to point at
      const lines = this.linesOf(path, file ? file.source.text : data!.text);
      return { uri, range: { start: lines.positionAt(start), end: lines.positionAt(end) } };
    },
  };

  private lineCache = new Map<string, LineIndex>();
  private linesOf(path: string, text: string): LineIndex {
    const hit = this.lineCache.get(path);
    if (hit && hit.text === text) return hit;
    const idx = new LineIndex(text);
    this.lineCache.set(path, idx);
    return idx;
  }

  // ---------------------------------------------------------------- documents

  private openText(uri: string, languageId: string, version: number, text: string): void {
    if (this.cellOwner.has(uri) || uri.startsWith('vscode-notebook-cell:')) return; // cells arrive through notebook sync
    if (languageId !== 'python' && !uri.endsWith('.py')) return;
    const path = this.pathOf(uri);
    const doc = new PythonDocument(uri, path, version, text, this.parser);
    this.docs.get(uri)?.dispose();
    this.docs.set(uri, doc);
    this.byPath.set(path, { kind: 'py', doc });
    this.remember(path, uri);
    this.engine.setFile(path, doc.text, doc.tree);
    this.changed(path);
  }

  private changeText(uri: string, version: number, changes: readonly { range?: { start: { line: number; character: number }; end: { line: number; character: number } }; text: string }[]): void {
    const doc = this.docs.get(uri);
    if (!doc) return;
    doc.update(changes, version);
    this.engine.setFile(doc.path, doc.text, doc.tree);
    this.changed(doc.path);
  }

  private closeText(uri: string): void {
    const doc = this.docs.get(uri);
    if (!doc) return;
    this.docs.delete(uri);
    doc.dispose();
    this.byPath.delete(doc.path);
    this.results.delete(doc.path);
    this.timers.get(doc.path)?.();
    this.timers.delete(doc.path);
    this.lastEdit.delete(doc.path);
    if (!this.pull && !this.scanAll) this.conn.sendDiagnostics({ uri, diagnostics: [] });
    this.reloadFromDisk(doc.path);
  }

  private syncNotebook(nb: NotebookDocument): void {
    this.engine.setSource(nb.source);
    this.changed(nb.path);
  }

  // ---------------------------------------------------------------- analysis

  private currentViews(): Views {
    if (!this.views || this.views.gen !== this.gen) this.views = { gen: this.gen, views: new Views(this.engine.ws) };
    return this.views.views;
  }

  private versionOf(path: string): number {
    const o = this.byPath.get(path);
    return o ? (o.kind === 'py' ? o.doc.version : o.nb.version) : -1;
  }

  /** Analyses one path now (synchronously) unless a result of this generation exists. */
  private analyse(path: string): Result {
    const have = this.results.get(path);
    if (have && have.gen === this.gen) return have;
    let findings: Finding[] = [];
    if (this.settings.enabled) {
      try {
        findings = this.engine.analyze([path], this.currentViews());
      } catch (err) {
        this.logError(`analysis of ${path}`, err);
      }
    }
    const r = { gen: this.gen, version: this.versionOf(path), findings };
    this.results.set(path, r);
    return r;
  }

  private deps: { gen: number; rev: Map<string, Set<string>> } | undefined;

  /** importer sets by imported file, from the facts' imports resolved the way the interpreter resolves them. */
  private reverseImports(): Map<string, Set<string>> {
    if (this.deps?.gen === this.gen) return this.deps.rev;
    const rev = new Map<string, Set<string>>();
    const ws = this.engine.ws;
    for (const [from, f] of ws.files) {
      for (const imp of f.facts.imports) {
        const targets = [ws.resolveModule(from, imp.module, imp.level)];
        // `from pkg import mod` may name a submodule
        if (imp.member) targets.push(ws.resolveModule(from, imp.module ? `${imp.module}.${imp.member}` : imp.member, imp.level));
        for (const t of targets) if (t && t !== from) (rev.get(t) ?? rev.set(t, new Set()).get(t)!).add(from);
      }
    }
    this.deps = { gen: this.gen, rev };
    return rev;
  }

  /** Files whose analysis may report findings in `path`: those importing it, directly or through other files. */
  private dependentsOf(path: string): string[] {
    const rev = this.reverseImports();
    const out: string[] = [];
    const seen = new Set([path]);
    const queue = [path];
    while (queue.length && out.length < MAX_DEPENDENTS) {
      for (const d of rev.get(queue.shift()!) ?? []) {
        if (seen.has(d)) continue;
        seen.add(d);
        out.push(d);
        queue.push(d);
      }
    }
    return out;
  }

  /** Analyses a file and the files that import it, so findings they report into it (a script's batch size) appear. */
  private analyseFor(path: string): void {
    this.analyse(path);
    if (!this.settings.enabled) return;
    for (const d of this.dependentsOf(path)) this.analyse(d);
  }

  /**
   * Whether the server pushes diagnostics for an open path. Notebooks are always pushed: the VS Code language
   * client (9.x) pulls only for text documents it opened itself, never for notebook cells, so a pull-only notebook
   * would show nothing. The pull handler answers cells with an empty report, so no client sees them twice.
   */
  private pushes(path: string): boolean {
    return !this.pull || this.byPath.get(path)?.kind === 'nb';
  }

  private get pushesAny(): boolean {
    return !this.pull || this.notebooks.size > 0;
  }

  /**
   * A document changed: everything depending on the workspace is stale; analyse it soon. The first edit after a
   * pause (no edit of this document within the debounce) is analysed as soon as the messages already read are
   * handled; an edit within the debounce of the previous one is part of a burst and waits out the debounce.
   */
  private changed(path: string): void {
    this.gen++;
    this.wsReport = undefined;
    if (!this.pushesAny) return; // the client asks when it wants diagnostics
    const now = performance.now();
    const prev = this.lastEdit.get(path);
    this.lastEdit.set(path, now);
    const pending = this.timers.get(path);
    if (pending) pending();
    const run = () => {
      this.timers.delete(path);
      void this.runRound(path).catch((err: unknown) => this.logError('analysis round', err));
    };
    const idle = !pending && (prev === undefined || now - prev >= this.debounceMs);
    if (!idle) {
      const t = setTimeout(run, this.debounceMs);
      this.timers.set(path, () => clearTimeout(t));
      return;
    }
    // Two turns of setImmediate: the connection handles one queued message per turn and schedules its next turn
    // after the handler returns, so after two turns every message read with this one (a burst written at once)
    // has been handled, and a later edit of the burst has cancelled this run and started the debounce.
    let cancelled = false;
    setImmediate(() => {
      if (!cancelled) setImmediate(() => (cancelled ? undefined : run()));
    });
    this.timers.set(path, () => {
      cancelled = true;
    });
  }

  /** A file on disk, the workspace load or the settings changed: re-analyse what is open (and all, when scanning). */
  private workspaceChanged(): void {
    this.gen++;
    this.wsReport = undefined;
    if (this.pull && this.refreshSupport) this.conn.languages.diagnostics.refresh();
    if (!this.pushesAny) return;
    void this.runRound(undefined).catch((err: unknown) => this.logError('analysis round', err));
  }

  /**
   * One push round: the edited document first, then the other open ones, then (when scanning) the rest of the
   * workspace. Each step yields to the event loop; a newer round or edit cancels the rest of this one.
   */
  private async runRound(first: string | undefined): Promise<void> {
    const round = ++this.round;
    const gen = this.gen;
    const open = [...this.byPath.keys()];
    const order = first ? [first, ...open.filter((p) => p !== first)] : open;
    const cancelled = () => round !== this.round || gen !== this.gen;
    for (const path of order) {
      if (cancelled()) return;
      if (!this.byPath.has(path) || !this.pushes(path)) continue;
      this.analyse(path);
      // the importers one at a time, so a newer edit stops the rest of them
      for (const d of this.settings.enabled ? this.dependentsOf(path) : []) {
        await new Promise((r) => setImmediate(r));
        if (cancelled()) return;
        this.analyse(d);
      }
      this.publish(path);
      await new Promise((r) => setImmediate(r));
    }
    if (!this.scanAll || this.pull) return; // a pulling client asks for the workspace itself
    for (const path of this.engine.ws.files.keys()) {
      if (cancelled()) return;
      if (this.byPath.has(path)) continue;
      this.analyse(path);
      this.publish(path);
      await new Promise((r) => setImmediate(r));
    }
  }

  /** Findings located in `path`: from its own analysis and from other analyses of this generation. */
  private findingsIn(path: string): Finding[] {
    const out: Finding[] = [];
    const seen = new Set<string>();
    for (const [p, r] of this.results) {
      if (p !== path && r.gen !== this.gen) continue;
      for (const f of r.findings) {
        if (f.path !== path) continue;
        const k = findingKey(f);
        if (seen.has(k)) continue;
        seen.add(k);
        out.push(f);
      }
    }
    return out;
  }

  /** Diagnostics per editor URI for one engine path (every cell of a notebook gets a list, maybe empty). */
  private diagnosticsFor(path: string): Map<string, Diagnostic[]> {
    const out = new Map<string, Diagnostic[]>();
    const owner = this.byPath.get(path);
    if (owner?.kind === 'nb') for (const cell of owner.nb.cells) out.set(cell.uri, []);
    else {
      const uri = this.uriOf(path);
      if (uri) out.set(uri, []);
    }
    for (const f of this.findingsIn(path)) {
      const d = toDiagnostic(f, this.locator);
      if (d) (out.get(d.uri) ?? out.set(d.uri, []).get(d.uri)!).push(d.diagnostic);
    }
    return out;
  }

  private publish(path: string): void {
    const version = this.byPath.has(path) ? this.versionOf(path) : undefined;
    const owner = this.byPath.get(path);
    for (const [uri, diagnostics] of this.diagnosticsFor(path)) {
      const v = owner?.kind === 'nb' ? owner.nb.cellByUri(uri)?.version : version;
      this.conn.sendDiagnostics({ uri, diagnostics, ...(v !== undefined ? { version: v } : {}) });
    }
  }

  private resultId(): string {
    return `g${this.gen}`;
  }

  private async pullDocument(uri: string, previous: string | undefined, token: CancellationToken): Promise<DocumentDiagnosticReport> {
    const nb = this.cellOwner.get(uri);
    if (nb) return { kind: DocumentDiagnosticReportKind.Full, resultId: 'pushed', items: [] }; // cells are pushed (see pushes)
    const path = this.pathOf(uri);
    if (token.isCancellationRequested) throw new ResponseError(LSPErrorCodes.ServerCancelled, 'cancelled', { retriggerRequest: true });
    if (previous === this.resultId() && this.results.get(path)?.gen === this.gen) return { kind: DocumentDiagnosticReportKind.Unchanged, resultId: previous };
    if (!this.engine.ws.get(path)) return { kind: DocumentDiagnosticReportKind.Full, resultId: this.resultId(), items: [] };
    // let a burst of edits settle before the synchronous analysis starts
    await new Promise((r) => setImmediate(r));
    if (token.isCancellationRequested) throw new ResponseError(LSPErrorCodes.ServerCancelled, 'cancelled', { retriggerRequest: true });
    this.analyseFor(path);
    return { kind: DocumentDiagnosticReportKind.Full, resultId: this.resultId(), items: this.diagnosticsFor(path).get(uri) ?? [] };
  }

  private async pullWorkspace(previous: { uri: string; value: string }[], token: CancellationToken): Promise<WorkspaceDiagnosticReport> {
    if (!this.scanAll || !this.workspaceLoaded) return { items: [] };
    const prev = new Map(previous.map((p) => [p.uri, p.value]));
    if (!this.wsReport || this.wsReport.gen !== this.gen) {
      const gen = this.gen;
      const items: WorkspaceDocumentDiagnosticReport[] = [];
      for (const path of this.engine.ws.files.keys()) {
        if (this.byPath.has(path)) continue;
        if (token.isCancellationRequested || gen !== this.gen) throw new ResponseError(LSPErrorCodes.ServerCancelled, 'cancelled', { retriggerRequest: true });
        this.analyse(path);
        for (const [uri, diags] of this.diagnosticsFor(path)) items.push({ kind: DocumentDiagnosticReportKind.Full, uri, version: null, resultId: `g${gen}`, items: diags });
        await new Promise((r) => setImmediate(r));
      }
      this.wsReport = { gen, items };
    }
    return {
      items: this.wsReport.items.map((it) => (prev.get(it.uri) === it.resultId ? { kind: DocumentDiagnosticReportKind.Unchanged, uri: it.uri, version: null, resultId: it.resultId! } : it)),
    };
  }

  private async scanWorkspace(): Promise<{ files: number; findings: number }> {
    this.scanAll = true;
    while (!this.workspaceLoaded) await new Promise((r) => setTimeout(r, 50));
    let findings = 0;
    const paths = [...this.engine.ws.files.keys()];
    for (const path of paths) findings += this.analyse(path).findings.filter((f) => f.path === path).length;
    this.workspaceChanged();
    return { files: paths.length, findings };
  }

  // ---------------------------------------------------------------- code actions

  /** The engine path, the program offset range and the findings for a document URI (text or cell). */
  private target(uri: string): { path: string; findings: Finding[] } | undefined {
    const nb = this.cellOwner.get(uri);
    const path = nb ? nb.path : this.pathOf(uri);
    if (!this.engine.ws.get(path)) return undefined;
    this.analyseFor(path);
    return { path, findings: this.findingsIn(path) };
  }

  private codeActions(p: CodeActionParams): CodeAction[] {
    const t = this.target(p.textDocument.uri);
    if (!t) return [];
    const only = p.context.only;
    const wants = (kind: string) => !only || only.some((o) => kind === o || kind.startsWith(`${o}.`));
    const actions: CodeAction[] = [];
    if (wants(CodeActionKind.QuickFix)) {
      for (const f of t.findings) {
        const d = toDiagnostic(f, this.locator);
        if (!d || d.uri !== p.textDocument.uri || !rangesOverlap(d.diagnostic.range, p.range)) continue;
        const sent = p.context.diagnostics.find((x) => (x.data as DiagnosticData | undefined)?.key === (d.diagnostic.data as DiagnosticData).key) ?? d.diagnostic;
        let preferred = false;
        for (const fix of f.fixes) {
          const changes = toWorkspaceChanges(fix.edits, this.locator);
          if (!changes) continue;
          const isPreferred: boolean = fix.kind === 'safe' && !preferred;
          preferred ||= isPreferred;
          actions.push({ title: fix.kind === 'safe' ? fix.title : `${fix.title} (changes behaviour: review)`, kind: CodeActionKind.QuickFix, diagnostics: [sent], isPreferred, edit: { changes } });
        }
        const allow = this.allowanceEdit(f);
        if (allow) actions.push({ title: `Allow ${f.rule} here (add a regwise comment with a reason)`, kind: CodeActionKind.QuickFix, diagnostics: [sent], edit: allow });
      }
    }
    if (wants(FIX_ALL_KIND)) {
      const edit = this.fixAllEdit(p.textDocument.uri);
      if (edit) actions.push({ title: 'Regwise: apply all safe fixes in this file', kind: FIX_ALL_KIND, edit });
    }
    return actions;
  }

  /** Inserts `# regwise: allow RULE -- reason` on its own line above the finding (it covers the next line). */
  private allowanceEdit(f: Finding): WorkspaceEdit | undefined {
    const text = this.engine.ws.get(f.path)?.source.text;
    if (text === undefined) return undefined;
    const lines = this.linesOf(`\0${f.path}`, text);
    const lineStart = lines.offsetAt({ line: f.span.line, character: 0 });
    const indent = /^[ \t]*/.exec(lines.lineText(f.span.line))![0];
    const changes = toWorkspaceChanges([{ path: f.path, start: lineStart, end: lineStart, newText: `${indent}# regwise: allow ${f.rule} -- reason: say why this is intended\n` }], this.locator);
    return changes ? { changes } : undefined;
  }

  /** Every safe fix in a file through the engine's fix applier, as one workspace edit; undefined when none apply. */
  fixAllEdit(uri: string): WorkspaceEdit | undefined {
    const t = this.target(uri);
    if (!t) return undefined;
    const file = this.engine.ws.get(t.path)!;
    const original = file.source.text;
    if (file.source.cells) {
      // a notebook: one pass of the applier over the joined program; each edit lands in its cell
      const { applied } = applyFixesOnce(this.parser, original, chooseFixes(t.findings, t.path, 'safe'));
      if (!applied.length) return undefined;
      const changes = toWorkspaceChanges(applied.flatMap((c) => c.fix.edits), this.locator);
      return changes ? { changes } : undefined;
    }
    const uriOfPath = this.uriOf(t.path);
    if (!uriOfPath) return undefined;
    const saved = file;
    let fixed: string;
    try {
      fixed = fixUntilStable(this.parser, t.path, original, 'safe', (text) => {
        if (text === original) return t.findings;
        this.engine.setFile(t.path, text);
        return this.engine.analyze([t.path]);
      }).text;
    } finally {
      // put back exactly what was there, so cached views and results stay valid
      this.engine.ws.addFile(saved.source, saved.facts);
    }
    if (fixed === original) return undefined;
    let a = 0;
    while (a < original.length && a < fixed.length && original[a] === fixed[a]) a++;
    let b = 0;
    while (b < original.length - a && b < fixed.length - a && original[original.length - 1 - b] === fixed[fixed.length - 1 - b]) b++;
    const lines = this.linesOf(t.path, original);
    return { changes: { [uriOfPath]: [{ range: { start: lines.positionAt(a), end: lines.positionAt(original.length - b) }, newText: fixed.slice(a, fixed.length - b) }] } };
  }

  // ---------------------------------------------------------------- hover and structure

  private hover(p: HoverParams): Hover | null {
    const uri = p.textDocument.uri;
    const nb = this.cellOwner.get(uri);
    let path: string;
    let offset: number;
    if (nb) {
      const map = nb.mapOf(uri);
      if (!map) return null;
      path = nb.path;
      offset = nb.lines.offsetAt({ line: map.line + p.position.line, character: p.position.character });
    } else {
      const doc = this.docs.get(uri);
      path = this.pathOf(uri);
      const text = doc?.text ?? this.engine.ws.get(path)?.source.text;
      if (text === undefined) return null;
      offset = (doc?.lines ?? this.linesOf(path, text)).offsetAt(p.position);
    }
    if (!this.engine.ws.get(path) || !this.settings.enabled) return null;
    this.analyseFor(path);
    const md = hoverMarkdown(this.currentViews(), path, offset, this.findingsIn(path), this.rules, this.engine.thresholds, (err) => this.logError('hover section', err));
    return md ? { contents: { kind: 'markdown', value: md } } : null;
  }

  private modelStructure(uri: string): string {
    const nb = this.cellOwner.get(uri);
    const path = nb ? nb.path : this.pathOf(uri);
    if (!this.engine.ws.get(path)) return `Regwise does not know ${uri}.`;
    const graphs = this.currentViews().models.graphsIn(path);
    if (!graphs.length) return `No nn.Module classes found in ${path}.`;
    const out: string[] = [];
    for (const g of graphs) {
      out.push(`${g.className}  (${path}:${g.classSpan.line + 1})${g.traced ? '' : '  [forward not traced]'}`);
      const feeds = new Map<string, string[]>();
      for (const [a, b] of g.flow) feeds.set(a.name, [...(feeds.get(a.name) ?? []), b.name]);
      for (const l of g.layers) {
        const args = [...l.inst.args].filter(([k]) => k !== 'device' && k !== 'dtype').map(([k, v]) => `${k}=${JSON.stringify(show(v))}`).join(', ');
        const to = feeds.get(l.name);
        const where = l.site ? `${l.site.path === path ? '' : l.site.path}:${l.site.call.span.line + 1}` : '';
        out.push(`  ${l.name.padEnd(28)} ${l.type.replace(/^torch\.nn\./, 'nn.').padEnd(18)} ${args}${to ? `  → ${to.join(', ')}` : ''}${where ? `  [${where}]` : ''}`);
      }
      out.push('');
    }
    return out.join('\n');
  }

  /** For tests and the benchmark: the locations the server would report, without the protocol. */
  locate(path: string, start: number, end: number): Location | undefined {
    return this.locator.locate(path, start, end);
  }
}

function makeCell(uri: string, kind: 'code' | 'other', language: string, version: number, text: string): Cell {
  return { uri, kind, language, version, text, lines: new LineIndex(text) };
}
