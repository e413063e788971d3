// Protocol tests: the built language server over stdio, driven by a real client library (vscode-languageserver-protocol).
import * as fs from 'node:fs';
import * as path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import {
  CodeActionRequest,
  DiagnosticSeverity,
  DiagnosticTag,
  DidChangeNotebookDocumentNotification,
  DidChangeWatchedFilesNotification,
  FileChangeType,
  DidChangeTextDocumentNotification,
  DidOpenNotebookDocumentNotification,
  DidOpenTextDocumentNotification,
  DocumentDiagnosticRequest,
  HoverRequest,
  LSPErrorCodes,
  WorkspaceDiagnosticRequest,
  type ClientCapabilities,
  type CodeAction,
  NotebookCellKind,
  type Diagnostic,
  type FullDocumentDiagnosticReport,
  type MarkupContent,
  type TextEdit,
  type WorkspaceEdit,
  type WorkspaceFullDocumentDiagnosticReport,
} from 'vscode-languageserver-protocol/node';
import { ROOT, TestClient, applyTextEdits, copySample, editsFor, rangeOf, readFile, uriOf } from './harness';

const STEM_CONV = 'nn.Conv2d(in_ch, out_ch, kernel_size=5, stride=2, padding=2)';
const STEM_BN = 'nn.BatchNorm2d(out_ch)';
const RULE = 'bias-before-norm';

const clients: TestClient[] = [];
afterEach(async () => {
  await Promise.all(clients.splice(0).map((c) => c.stop()));
});

async function start(opts: Parameters<typeof TestClient.start>[0]) {
  const r = await TestClient.start(opts);
  clients.push(r.client);
  return r;
}

async function open(client: TestClient, file: string, version = 1): Promise<{ uri: string; text: string }> {
  const text = readFile(file);
  const uri = uriOf(file);
  await client.conn.sendNotification(DidOpenTextDocumentNotification.type, { textDocument: { uri, languageId: 'python', version, text } });
  return { uri, text };
}

/** Sends edits as incremental changes (last edit first, so earlier ranges stay valid), as editors do. */
async function change(client: TestClient, uri: string, version: number, edits: readonly TextEdit[]): Promise<void> {
  const ordered = [...edits].sort((a, b) => b.range.start.line - a.range.start.line || b.range.start.character - a.range.start.character);
  await client.conn.sendNotification(DidChangeTextDocumentNotification.type, {
    textDocument: { uri, version },
    contentChanges: ordered.map((e) => ({ range: e.range, text: e.newText })),
  });
}

function ofRule(ds: readonly Diagnostic[], rule = RULE): Diagnostic[] {
  return ds.filter((d) => d.code === rule);
}

const PUSH_CAPS: ClientCapabilities = { textDocument: { publishDiagnostics: { relatedInformation: true, versionSupport: true, tagSupport: { valueSet: [1, 2] } } }, window: { workDoneProgress: true } };
const DOC_PAGE = path.join(ROOT, 'dist', 'rules', `${RULE}.md`);

describe('push diagnostics', () => {
  it('reports the stem bias with its exact range, code, severity, tag and the norm as related location', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const { uri, text } = await open(client, path.join(root, 'models.py'));
    const pub = await client.diagnosticsOf(uri, 1);
    const found = ofRule(pub.diagnostics);
    expect(found).toHaveLength(1);
    const d = found[0];
    expect(d.range).toEqual(rangeOf(text, STEM_CONV));
    expect(d.source).toBe('regwise');
    expect(d.severity).toBe(DiagnosticSeverity.Warning);
    expect(d.tags).toEqual([DiagnosticTag.Unnecessary]);
    expect(d.message).toContain('Pass bias=False');
    expect(d.relatedInformation).toHaveLength(1);
    expect(d.relatedInformation![0].location).toEqual({ uri, range: rangeOf(text, STEM_BN) });
    expect(d.relatedInformation![0].message).toContain('BatchNorm2d `bn`');
    // the rule page shipped in dist/rules, when the rule has one
    if (fs.existsSync(DOC_PAGE)) expect(d.codeDescription?.href).toBe(uriOf(DOC_PAGE));
    else expect(d.codeDescription).toBeUndefined();
  });

  it('offers the safe fix as the preferred quick fix; applying it clears the finding', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const { uri, text } = await open(client, path.join(root, 'models.py'));
    const [d] = ofRule((await client.diagnosticsOf(uri, 1)).diagnostics);
    const actions = (await client.conn.sendRequest(CodeActionRequest.type, { textDocument: { uri }, range: d.range, context: { diagnostics: [d] } })) as CodeAction[];
    const fix = actions.find((a) => a.isPreferred);
    expect(fix?.kind).toBe('quickfix');
    expect(fix?.title).toBe('Pass bias=False to `conv`');
    expect(fix?.diagnostics?.[0].code).toBe(RULE);
    expect(actions.filter((a) => a.isPreferred)).toHaveLength(1);
    const edits = editsFor(fix!.edit, uri);
    const fixed = applyTextEdits(text, edits);
    expect(fixed).toContain('nn.Conv2d(in_ch, out_ch, kernel_size=5, stride=2, padding=2, bias=False)');
    await change(client, uri, 2, edits);
    const after = await client.diagnosticsOf(uri, 2);
    expect(ofRule(after.diagnostics)).toEqual([]);
  });

  it('adds the allowance comment for the rule on that line, which silences it', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const { uri, text } = await open(client, path.join(root, 'legacy.py'));
    const [d] = ofRule((await client.diagnosticsOf(uri, 1)).diagnostics);
    expect(d.range).toEqual(rangeOf(text, 'nn.Conv2d(c_in, c_out, kernel_size=3, padding=1)'));
    const actions = (await client.conn.sendRequest(CodeActionRequest.type, { textDocument: { uri }, range: d.range, context: { diagnostics: [d] } })) as CodeAction[];
    const allow = actions.find((a) => a.title.startsWith(`Allow ${RULE}`));
    expect(allow).toBeDefined();
    expect(allow!.isPreferred).toBeFalsy();
    const edits = editsFor(allow!.edit, uri);
    const next = applyTextEdits(text, edits);
    const lines = next.split('\n');
    expect(lines[d.range.start.line]).toMatch(new RegExp(`^\\s*# regwise: allow ${RULE} -- \\S`));
    expect(lines[d.range.start.line + 1]).toBe(text.split('\n')[d.range.start.line]);
    await change(client, uri, 2, edits);
    expect(ofRule((await client.diagnosticsOf(uri, 2)).diagnostics)).toEqual([]);
  });

  it('source.fixAll.regwise applies every safe fix in the file through the one applier', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const { uri, text } = await open(client, path.join(root, 'models.py'));
    await client.diagnosticsOf(uri, 1);
    const actions = (await client.conn.sendRequest(CodeActionRequest.type, {
      textDocument: { uri },
      range: { start: { line: 0, character: 0 }, end: { line: 0, character: 0 } },
      context: { diagnostics: [], only: ['source.fixAll'] },
    })) as CodeAction[];
    expect(actions.map((a) => a.kind)).toEqual(['source.fixAll.regwise']);
    const edits = editsFor(actions[0].edit, uri);
    expect(applyTextEdits(text, edits)).toBe(text.replace(STEM_CONV, STEM_CONV.replace(')', ', bias=False)')));
    await change(client, uri, 2, edits);
    expect(ofRule((await client.diagnosticsOf(uri, 2)).diagnostics)).toEqual([]);
  });

  it('builds the workspace model with work-done progress and finds cross-file layers', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    await client.waitFor('progress end', () => client.progress.some((p) => (p as { value?: { kind?: string } }).value?.kind === 'end'));
    expect(client.serverRequests).toContain('window/workDoneProgress/create');
    const kinds = client.progress.map((p) => (p as { value: { kind: string } }).value.kind);
    expect(kinds[0]).toBe('begin');
    expect(kinds[kinds.length - 1]).toBe('end');
  });

  it('reports into an open model file what a closed training script finds, with the config line as related location', async () => {
    // the workspace holds the package, as a repository does, so `from pollinator_cnn.models import ...` resolves
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root: path.dirname(root), capabilities: PUSH_CAPS });
    const { uri, text } = await open(client, path.join(root, 'models.py'));
    const pub = await client.waitFor('batchnorm-tiny-batch in models.py', () => client.diagnostics.get(uri)?.find((p) => ofRule(p.diagnostics, 'batchnorm-tiny-batch').length));
    const [d] = ofRule(pub.diagnostics, 'batchnorm-tiny-batch');
    expect(d.range).toEqual(rangeOf(text, STEM_BN));
    const yamlPath = path.join(root, 'configs', 'run.yaml');
    const yamlLine = readFile(yamlPath).split('\n').findIndex((l) => l.trim() === 'batch_size: 2');
    const fromConfig = d.relatedInformation!.find((r) => r.location.uri === uriOf(yamlPath));
    expect(fromConfig?.location.range.start.line).toBe(yamlLine);
    const trainText = readFile(path.join(root, 'train.py'));
    const loop = d.relatedInformation!.find((r) => r.location.uri === uriOf(path.join(root, 'train.py')));
    expect(loop?.location.range.start.line).toBe(rangeOf(trainText, 'for images, labels in loader:').start.line);
  });

  it('re-analyses an open model file when the YAML config a closed script reads changes on disk', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root: path.dirname(root), capabilities: PUSH_CAPS });
    const { uri } = await open(client, path.join(root, 'models.py'));
    await client.waitFor('batchnorm-tiny-batch in models.py', () => client.diagnostics.get(uri)?.find((p) => ofRule(p.diagnostics, 'batchnorm-tiny-batch').length));
    const yamlPath = path.join(root, 'configs', 'run.yaml');
    fs.writeFileSync(yamlPath, readFile(yamlPath).replace(/^( {2}batch_size:) 2$/m, '$1 64'));
    expect(readFile(yamlPath)).toMatch(/^ {2}batch_size: 64$/m);
    const seen = client.diagnostics.get(uri)!.length;
    await client.conn.sendNotification(DidChangeWatchedFilesNotification.type, { changes: [{ uri: uriOf(yamlPath), type: FileChangeType.Changed }] });
    const next = await client.waitFor('re-published diagnostics', () => client.diagnostics.get(uri)!.slice(seen)[0]);
    expect(ofRule(next.diagnostics, 'batchnorm-tiny-batch')).toEqual([]);
    expect(ofRule(next.diagnostics)).toHaveLength(1);
  });

  it('coalesces a burst of edits: only the newest version is analysed and published', async () => {
    const root = copySample('pollinator_cnn');
    // a debounce far above the time the burst takes to arrive, so a loaded machine cannot split the burst
    const { client } = await start({ root, capabilities: PUSH_CAPS, initializationOptions: { debounceMs: 400 } });
    const { uri, text } = await open(client, path.join(root, 'models.py'));
    await client.diagnosticsOf(uri, 1);
    const end = rangeOf(text, 'return self.head(feats)').end;
    // seven keystrokes in one write, as a fast typist's editor sends them
    client.writeRaw(
      [2, 3, 4, 5, 6, 7, 8].map((v) => {
        const at = { line: end.line, character: end.character + v - 2 };
        return { method: 'textDocument/didChange', params: { textDocument: { uri, version: v }, contentChanges: [{ range: { start: at, end: at }, text: ' ' }] } };
      }),
    );
    const last = await client.diagnosticsOf(uri, 8);
    expect(ofRule(last.diagnostics)).toHaveLength(1);
    await new Promise((r) => setTimeout(r, 300));
    // v1 may be published again when the workspace model finishes loading; no version in between ever is
    const versions = client.diagnostics.get(uri)!.map((p) => p.version!);
    expect(versions.filter((v) => v > 1 && v < 8)).toEqual([]);
    expect(versions.filter((v) => v === 8)).toHaveLength(1);
  });

  it('answers a request cancelled before it ran with RequestCancelled, and keeps serving', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const { uri, text } = await open(client, path.join(root, 'models.py'));
    await client.diagnosticsOf(uri, 1);
    const at = rangeOf(text, STEM_CONV).start;
    // the request and its cancellation in one write, so the server reads them together (as a fast client sends them)
    client.writeRaw([
      { id: 'raw-hover', method: 'textDocument/hover', params: { textDocument: { uri }, position: at } },
      { method: '$/cancelRequest', params: { id: 'raw-hover' } },
    ]);
    const answer = await client.rawResponse('raw-hover');
    expect(answer.result).toBeUndefined();
    expect(answer.error?.code).toBe(LSPErrorCodes.RequestCancelled);
    const hover = await client.conn.sendRequest(HoverRequest.type, { textDocument: { uri }, position: at });
    expect((hover?.contents as MarkupContent).value).toContain('torch.nn.Conv2d');
  });

  it('survives bad input: a file of garbage, a request for an unknown document', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const uri = uriOf(path.join(root, 'garbage.py'));
    const junk = `${'('.repeat(3000)}\n\u0000\udc00 class :: def\n${'x = [' .repeat(500)}`;
    await client.conn.sendNotification(DidOpenTextDocumentNotification.type, { textDocument: { uri, languageId: 'python', version: 1, text: junk } });
    const pub = await client.diagnosticsOf(uri, 1);
    expect(pub.diagnostics.filter((d) => d.code === 'internal-error')).toEqual([]);
    const none = await client.conn.sendRequest(CodeActionRequest.type, { textDocument: { uri: 'file:///nowhere/x.py' }, range: { start: { line: 0, character: 0 }, end: { line: 0, character: 0 } }, context: { diagnostics: [] } });
    expect(none).toEqual([]);
    const { uri: m } = await open(client, path.join(root, 'models.py'));
    expect(ofRule((await client.diagnosticsOf(m, 1)).diagnostics)).toHaveLength(1);
  });

  it('applies level overrides from the editor settings (workspace/configuration)', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: { ...PUSH_CAPS, workspace: { configuration: true } }, configuration: { regwise: { levels: { [RULE]: 'error' } } } });
    await client.waitFor('configuration request', () => client.serverRequests.includes('workspace/configuration'));
    const { uri } = await open(client, path.join(root, 'models.py'));
    const [d] = ofRule((await client.diagnosticsOf(uri, 1)).diagnostics);
    expect(d.severity).toBe(DiagnosticSeverity.Error);
  });
});

describe('hover', () => {
  it('shows the layer: qualified names, resolved type and arguments, feeds, and the finding with its why', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const { uri, text } = await open(client, path.join(root, 'models.py'));
    await client.waitFor('workspace loaded', () => client.progress.some((p) => (p as { value?: { kind?: string } }).value?.kind === 'end'));
    const at = rangeOf(text, STEM_CONV).start;
    const hover = await client.conn.sendRequest(HoverRequest.type, { textDocument: { uri }, position: { line: at.line, character: at.character + 4 } });
    const md = (hover!.contents as MarkupContent).value;
    expect(md).toContain('`Stem.conv`');
    expect(md).toContain('`PollinatorNet.backbone.stem.conv`');
    expect(md).toContain('torch.nn.Conv2d(in_channels=3, out_channels=32, kernel_size=5, stride=2, padding=2');
    expect(md).toContain('bias=True');
    expect(md).toContain('feeds `bn` (nn.BatchNorm2d)');
    expect(md).toContain(`\`${RULE}\``);
    expect(md).toContain('*Why:*');
    const blank = await client.conn.sendRequest(HoverRequest.type, { textDocument: { uri }, position: { line: 0, character: 0 } });
    expect(blank).toBeNull();
  });
  it('on a DataLoader: its batch size with the config line it came from, and the per-device batch of the model it trains', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root: path.dirname(root), capabilities: PUSH_CAPS });
    await client.waitFor('workspace loaded', () => client.progress.some((p) => (p as { value?: { kind?: string } }).value?.kind === 'end'));
    const { uri, text } = await open(client, path.join(root, 'train.py'));
    const at = rangeOf(text, 'DataLoader(train_set').start;
    const hover = await client.conn.sendRequest(HoverRequest.type, { textDocument: { uri }, position: { line: at.line, character: at.character + 2 } });
    const md = (hover!.contents as MarkupContent).value;
    const yaml = readFile(path.join(root, 'configs', 'run.yaml')).split('\n');
    const line = yaml.findIndex((l) => l.trim() === 'batch_size: 2') + 1;
    expect(md).toContain('**Regwise** · DataLoader');
    expect(md).toContain(`batch_size = 2 (from run.yaml:${line}`);
    const loop = rangeOf(text, 'for images, labels in loader:').start.line + 1;
    expect(md).toContain(`- trains \`PollinatorNet\` in the loop at train.py:${loop}: 2 samples per device per step`);
  });

  it('on a BatchNorm layer: the per-device batch each training loop gives it and where the batch size came from', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root: path.dirname(root), capabilities: PUSH_CAPS });
    await client.waitFor('workspace loaded', () => client.progress.some((p) => (p as { value?: { kind?: string } }).value?.kind === 'end'));
    const { uri, text } = await open(client, path.join(root, 'models.py'));
    const at = rangeOf(text, STEM_BN).start;
    const hover = await client.conn.sendRequest(HoverRequest.type, { textDocument: { uri }, position: { line: at.line, character: at.character + 4 } });
    const md = (hover!.contents as MarkupContent).value;
    const yamlLine = readFile(path.join(root, 'configs', 'run.yaml')).split('\n').findIndex((l) => l.trim() === 'batch_size: 2') + 1;
    const loop = rangeOf(readFile(path.join(root, 'train.py')), 'for images, labels in loader:').start.line + 1;
    expect(md).toContain(`- as \`PollinatorNet.backbone.stem.bn\`, trains on 2 samples per device (batch_size 2 from run.yaml:${yamlLine} (train.batch_size)) in the loop at train.py:${loop}`);
    expect(md).toContain('batchnorm-tiny-batch');
  });

  it('on a mode switch and on the evaluation region it reaches', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    await client.waitFor('workspace loaded', () => client.progress.some((p) => (p as { value?: { kind?: string } }).value?.kind === 'end'));
    const { uri, text } = await open(client, path.join(root, 'train.py'));
    const sw = rangeOf(text, 'model.eval()').start;
    const onSwitch = await client.conn.sendRequest(HoverRequest.type, { textDocument: { uri }, position: { line: sw.line, character: sw.character + 7 } });
    const md = (onSwitch!.contents as MarkupContent).value;
    expect(md).toContain('mode switch `model.eval()`');
    expect(md).toContain(`(train.py:${rangeOf(text, 'with torch.no_grad():').start.line + 1})`);
    const region = rangeOf(text, 'torch.no_grad()').start;
    const inRegion = await client.conn.sendRequest(HoverRequest.type, { textDocument: { uri }, position: { line: region.line, character: region.character + 3 } });
    expect((inRegion!.contents as MarkupContent).value).toContain(`\`model\` is in eval mode (set by \`model.eval()\``);
  });
});

describe('project config file', () => {
  it('reads [levels] from regwise.toml and re-analyses open files when it changes on disk', async () => {
    const root = copySample('pollinator_cnn');
    fs.writeFileSync(path.join(root, 'regwise.toml'), `[levels]\n${RULE} = "error"\n`);
    const caps: ClientCapabilities = { ...PUSH_CAPS, workspace: { didChangeWatchedFiles: { dynamicRegistration: true } } };
    // (the first diagnostics already carry the file's level: the config is read before any analysis)
    const { client } = await start({ root, capabilities: caps });
    const { uri } = await open(client, path.join(root, 'models.py'));
    const first = await client.diagnosticsOf(uri, 1);
    expect(ofRule(first.diagnostics)[0].severity).toBe(DiagnosticSeverity.Error);
    await client.waitFor('file watcher registration', () => client.serverRequests.includes('client/registerCapability'));
    await client.waitFor('workspace loaded', () => client.progress.some((p) => (p as { value?: { kind?: string } }).value?.kind === 'end'));
    await new Promise((r) => setTimeout(r, 200));
    fs.writeFileSync(path.join(root, 'regwise.toml'), `[levels]\n${RULE} = "info"\n`);
    const seen = client.diagnostics.get(uri)!.length;
    await client.conn.sendNotification(DidChangeWatchedFilesNotification.type, { changes: [{ uri: uriOf(path.join(root, 'regwise.toml')), type: FileChangeType.Changed }] });
    const next = await client.waitFor('re-published diagnostics', () => client.diagnostics.get(uri)!.slice(seen).find((p) => ofRule(p.diagnostics).length));
    expect(ofRule(next.diagnostics)[0].severity).toBe(DiagnosticSeverity.Information);
  });

  it('lets the editor settings override the file', async () => {
    const root = copySample('pollinator_cnn');
    fs.writeFileSync(path.join(root, 'regwise.toml'), `[levels]\n${RULE} = "error"\n`);
    const { client } = await start({ root, capabilities: PUSH_CAPS, initializationOptions: { settings: { levels: { [RULE]: 'hint' } } } });
    const { uri } = await open(client, path.join(root, 'models.py'));
    await client.waitFor('progress end', () => client.progress.some((p) => (p as { value?: { kind?: string } }).value?.kind === 'end'));
    const { uri: u2 } = await open(client, path.join(root, 'legacy.py'));
    expect(ofRule((await client.diagnosticsOf(u2, 1)).diagnostics)[0].severity).toBe(DiagnosticSeverity.Hint);
    expect(uri).toBeDefined();
  });
});

describe('the extension\'s requests', () => {
  it('regwise/applySafeFixes returns one edit with every safe fix; regwise/modelStructure lists the layers', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const { uri, text } = await open(client, path.join(root, 'models.py'));
    await client.diagnosticsOf(uri, 1);
    const edit = await client.conn.sendRequest<WorkspaceEdit | null>('regwise/applySafeFixes', { uri });
    expect(applyTextEdits(text, editsFor(edit ?? undefined, uri))).toBe(text.replace(STEM_CONV, STEM_CONV.replace(')', ', bias=False)')));
    const table = await client.conn.sendRequest<string>('regwise/modelStructure', { uri });
    expect(table).toMatch(/^Stem {2}\(models\.py:\d+\)$/m);
    expect(table).toMatch(/^ {2}conv +nn\.Conv2d +in_channels=3, out_channels=32, kernel_size=5, stride=2, padding=2/m);
    expect(table).toContain('→ bn');
  });

  it('regwise/scanWorkspace reports every file and then publishes diagnostics for unopened ones', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const r = await client.conn.sendRequest<{ files: number; findings: number }>('regwise/scanWorkspace');
    expect(r.files).toBe(fs.readdirSync(root).filter((f) => f.endsWith('.py')).length);
    expect(r.findings).toBeGreaterThan(0);
    const legacy = uriOf(path.join(root, 'legacy.py'));
    const pub = await client.waitFor('legacy.py diagnostics', () => client.diagnostics.get(legacy)?.find((p) => ofRule(p.diagnostics).length));
    expect(ofRule(pub.diagnostics)[0].range).toEqual(rangeOf(readFile(path.join(root, 'legacy.py')), 'nn.Conv2d(c_in, c_out, kernel_size=3, padding=1)'));
  });
});

describe('pull diagnostics', () => {
  const PULL_CAPS: ClientCapabilities = { textDocument: { diagnostic: { dynamicRegistration: false, relatedDocumentSupport: false } }, workspace: { diagnostics: { refreshSupport: true } }, window: { workDoneProgress: true } };

  it('advertises a diagnostic provider, answers textDocument/diagnostic and pushes nothing', async () => {
    const root = copySample('pollinator_cnn');
    const { client, init } = await start({ root, capabilities: PULL_CAPS });
    await client.waitFor('diagnostic refresh after the workspace load', () => client.serverRequests.includes('workspace/diagnostic/refresh'));
    expect((init as { capabilities: { diagnosticProvider?: unknown } }).capabilities.diagnosticProvider).toMatchObject({ interFileDependencies: true, workspaceDiagnostics: true });
    const { uri, text } = await open(client, path.join(root, 'models.py'));
    const report = (await client.conn.sendRequest(DocumentDiagnosticRequest.type, { textDocument: { uri } })) as FullDocumentDiagnosticReport;
    expect(report.kind).toBe('full');
    const [d] = ofRule(report.items);
    expect(d.range).toEqual(rangeOf(text, STEM_CONV));
    expect(d.relatedInformation![0].location.range).toEqual(rangeOf(text, STEM_BN));
    const again = await client.conn.sendRequest(DocumentDiagnosticRequest.type, { textDocument: { uri }, previousResultId: report.resultId });
    expect(again.kind).toBe('unchanged');
    await change(client, uri, 2, [{ range: d.range, newText: 'nn.Conv2d(in_ch, out_ch, kernel_size=5, stride=2, padding=2, bias=False)' }]);
    const after = (await client.conn.sendRequest(DocumentDiagnosticRequest.type, { textDocument: { uri }, previousResultId: report.resultId })) as FullDocumentDiagnosticReport;
    expect(after.kind).toBe('full');
    expect(ofRule(after.items)).toEqual([]);
    expect(client.diagnostics.size).toBe(0);
  });

  it('answers workspace/diagnostic for the unopened files when scanning the workspace is on', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PULL_CAPS, initializationOptions: { settings: { scanWorkspaceOnOpen: true } } });
    await client.waitFor('diagnostic refresh after the workspace load', () => client.serverRequests.includes('workspace/diagnostic/refresh'));
    const report = await client.conn.sendRequest(WorkspaceDiagnosticRequest.type, { previousResultIds: [] });
    const legacy = report.items.find((i) => i.uri === uriOf(path.join(root, 'legacy.py'))) as WorkspaceFullDocumentDiagnosticReport;
    expect(legacy.version).toBeNull();
    const text = readFile(path.join(root, 'legacy.py'));
    expect(ofRule(legacy.items).map((d) => d.range)).toEqual([rangeOf(text, 'nn.Conv2d(c_in, c_out, kernel_size=3, padding=1)')]);
    const again = await client.conn.sendRequest(WorkspaceDiagnosticRequest.type, { previousResultIds: report.items.map((i) => ({ uri: i.uri, value: (i as WorkspaceFullDocumentDiagnosticReport).resultId! })) });
    expect(again.items.every((i) => i.kind === 'unchanged')).toBe(true);
  });
});

describe('notebook documents', () => {
  const cells = [
    { kind: NotebookCellKind.Markup, text: '# Camera-trap crops\nA quick look at a small net.' },
    { kind: NotebookCellKind.Code, text: 'import torch.nn as nn\n%matplotlib inline\n' },
    { kind: NotebookCellKind.Code, text: 'class Tiny(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 8, 3)\n        self.bn = nn.BatchNorm2d(8)\n\n    def forward(self, x):\n        return self.bn(self.conv(x))\n' },
  ];

  it('analyses the cells together in order; diagnostics and fixes land in the right cell', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const nbUri = uriOf(path.join(root, 'look.ipynb'));
    const cellUri = (i: number) => `vscode-notebook-cell:${path.join(root, 'look.ipynb')}#C${i}`;
    await client.conn.sendNotification(DidOpenNotebookDocumentNotification.type, {
      notebookDocument: { uri: nbUri, notebookType: 'jupyter-notebook', version: 1, cells: cells.map((c, i) => ({ kind: c.kind, document: cellUri(i) })) },
      cellTextDocuments: cells.map((c, i) => ({ uri: cellUri(i), languageId: c.kind === NotebookCellKind.Code ? 'python' : 'markdown', version: 1, text: c.text })),
    });
    const inCell = await client.diagnosticsOf(cellUri(2), 1);
    const [d] = ofRule(inCell.diagnostics);
    expect(d.range).toEqual(rangeOf(cells[2].text, 'nn.Conv2d(3, 8, 3)'));
    expect(d.relatedInformation![0].location).toEqual({ uri: cellUri(2), range: rangeOf(cells[2].text, 'nn.BatchNorm2d(8)') });
    expect((await client.diagnosticsOf(cellUri(1), 1)).diagnostics).toEqual([]);
    const actions = (await client.conn.sendRequest(CodeActionRequest.type, { textDocument: { uri: cellUri(2) }, range: d.range, context: { diagnostics: [d] } })) as CodeAction[];
    const fix = actions.find((a) => a.isPreferred)!;
    expect(Object.keys(fix.edit!.changes!)).toEqual([cellUri(2)]);
    const edits = editsFor(fix.edit, cellUri(2));
    expect(applyTextEdits(cells[2].text, edits)).toContain('nn.Conv2d(3, 8, 3, bias=False)');
    await client.conn.sendNotification(DidChangeNotebookDocumentNotification.type, {
      notebookDocument: { uri: nbUri, version: 2 },
      change: { cells: { textContent: [{ document: { uri: cellUri(2), version: 2 }, changes: edits.map((e) => ({ range: e.range, text: e.newText })) }] } },
    });
    expect(ofRule((await client.diagnosticsOf(cellUri(2), 2)).diagnostics)).toEqual([]);
  });

  it('pushes cell diagnostics to a pulling client too (VS Code pulls only for text documents) and answers cell pulls empty', async () => {
    const root = copySample('pollinator_cnn');
    const pull: ClientCapabilities = { textDocument: { diagnostic: {} }, workspace: { diagnostics: { refreshSupport: true } } };
    const { client } = await start({ root, capabilities: pull });
    const nbUri = uriOf(path.join(root, 'look3.ipynb'));
    const cellUri = (i: number) => `vscode-notebook-cell:${path.join(root, 'look3.ipynb')}#P${i}`;
    await client.conn.sendNotification(DidOpenNotebookDocumentNotification.type, {
      notebookDocument: { uri: nbUri, notebookType: 'jupyter-notebook', version: 1, cells: cells.map((c, i) => ({ kind: c.kind, document: cellUri(i) })) },
      cellTextDocuments: cells.map((c, i) => ({ uri: cellUri(i), languageId: c.kind === NotebookCellKind.Code ? 'python' : 'markdown', version: 1, text: c.text })),
    });
    const pushed = await client.waitFor('pushed cell diagnostics', () => client.diagnostics.get(cellUri(2))?.find((p) => ofRule(p.diagnostics).length));
    expect(ofRule(pushed.diagnostics)[0].range).toEqual(rangeOf(cells[2].text, 'nn.Conv2d(3, 8, 3)'));
    const pulled = (await client.conn.sendRequest(DocumentDiagnosticRequest.type, { textDocument: { uri: cellUri(2) } })) as FullDocumentDiagnosticReport;
    expect(pulled.items).toEqual([]);
  });

  it('answers hover inside a cell with the cell\'s own positions', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const nbUri = uriOf(path.join(root, 'look4.ipynb'));
    const cellUri = (i: number) => `vscode-notebook-cell:${path.join(root, 'look4.ipynb')}#H${i}`;
    await client.conn.sendNotification(DidOpenNotebookDocumentNotification.type, {
      notebookDocument: { uri: nbUri, notebookType: 'jupyter-notebook', version: 1, cells: cells.map((c, i) => ({ kind: c.kind, document: cellUri(i) })) },
      cellTextDocuments: cells.map((c, i) => ({ uri: cellUri(i), languageId: c.kind === NotebookCellKind.Code ? 'python' : 'markdown', version: 1, text: c.text })),
    });
    await client.diagnosticsOf(cellUri(2), 1);
    const at = rangeOf(cells[2].text, 'nn.BatchNorm2d(8)').start;
    const hover = await client.conn.sendRequest(HoverRequest.type, { textDocument: { uri: cellUri(2) }, position: { line: at.line, character: at.character + 3 } });
    const md = (hover!.contents as MarkupContent).value;
    expect(md).toContain('layer `Tiny.bn`');
    expect(md).toContain('torch.nn.BatchNorm2d(num_features=8');
  });

  it('follows cell structure changes: a new cell joins the program in its place, a removed one is cleared', async () => {
    const root = copySample('pollinator_cnn');
    const { client } = await start({ root, capabilities: PUSH_CAPS });
    const nbUri = uriOf(path.join(root, 'look2.ipynb'));
    const cellUri = (i: number) => `vscode-notebook-cell:${path.join(root, 'look2.ipynb')}#S${i}`;
    // the import lives in the first cell; the class alone in the second cannot resolve nn without it
    await client.conn.sendNotification(DidOpenNotebookDocumentNotification.type, {
      notebookDocument: { uri: nbUri, notebookType: 'jupyter-notebook', version: 1, cells: [{ kind: NotebookCellKind.Code, document: cellUri(2) }] },
      cellTextDocuments: [{ uri: cellUri(2), languageId: 'python', version: 1, text: cells[2].text }],
    });
    expect(ofRule((await client.diagnosticsOf(cellUri(2), 1)).diagnostics)).toEqual([]);
    await client.conn.sendNotification(DidChangeNotebookDocumentNotification.type, {
      notebookDocument: { uri: nbUri, version: 2 },
      change: { cells: { structure: { array: { start: 0, deleteCount: 0, cells: [{ kind: NotebookCellKind.Code, document: cellUri(1) }] }, didOpen: [{ uri: cellUri(1), languageId: 'python', version: 1, text: cells[1].text }] } } },
    });
    const found = await client.waitFor('the finding once the import cell is in', () => client.diagnostics.get(cellUri(2))?.find((p) => ofRule(p.diagnostics).length));
    expect(ofRule(found.diagnostics)[0].range).toEqual(rangeOf(cells[2].text, 'nn.Conv2d(3, 8, 3)'));
    const before = client.diagnostics.get(cellUri(2))!.length;
    await client.conn.sendNotification(DidChangeNotebookDocumentNotification.type, {
      notebookDocument: { uri: nbUri, version: 3 },
      change: { cells: { structure: { array: { start: 1, deleteCount: 1 }, didClose: [{ uri: cellUri(2) }] } } },
    });
    const cleared = await client.waitFor('the removed cell cleared', () => client.diagnostics.get(cellUri(2))!.slice(before).find((p) => p.diagnostics.length === 0));
    expect(cleared.diagnostics).toEqual([]);
  });
});
