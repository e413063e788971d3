// Edit-to-diagnostics latency of the language server over stdio: a generated 5,000-line model file, 100
// single-character edits at different places, time from didChange to the diagnostics of that version.
// Usage: node bench/lsp-latency.mjs [--lines N] [--edits N] [--debounce MS] [--save FILE]   (needs `npm run build` first)
import { spawn } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { pathToFileURL } from 'node:url';
import { createRequire } from 'node:module';

const require = createRequire(import.meta.url);
const lsp = require('vscode-languageserver-protocol/node');

const root = path.resolve(path.dirname(new URL(import.meta.url).pathname), '..');
const server = path.join(root, 'dist', 'server.js');
const arg = (name, def) => {
  const i = process.argv.indexOf(`--${name}`);
  return i > 0 ? Number(process.argv[i + 1]) : def;
};
const TARGET_LINES = arg('lines', 5000);
const EDITS = arg('edits', 100);
const DEBOUNCE = arg('debounce', undefined);
const TIMEOUT_MS = 30_000;

if (!fs.existsSync(server)) {
  console.error(`${server} is missing: run npm run build`);
  process.exit(2);
}

/** One model section with a distinct tag: helpers, a residual block, a network; every third keeps a cancelled bias. */
function section(tag) {
  const bias = tag % 3 === 0 ? '' : ', bias=False';
  return `
def conv3x3_${tag}(cin, cout, stride=1):
    return nn.Conv2d(cin, cout, kernel_size=3, stride=stride, padding=1, bias=False)


class Block${tag}(nn.Module):
    def __init__(self, cin=32, cout=32, stride=1, norm_layer=None):
        super().__init__()
        if norm_layer is None:
            norm_layer = nn.BatchNorm2d
        self.conv1 = conv3x3_${tag}(cin, cout, stride)
        self.bn1 = norm_layer(cout)
        self.relu = nn.ReLU(inplace=True)
        self.conv2 = conv3x3_${tag}(cout, cout)
        self.bn2 = norm_layer(cout)

    def forward(self, x):
        out = self.relu(self.bn1(self.conv1(x)))
        out = self.bn2(self.conv2(out))
        return self.relu(out + x)


class Net${tag}(nn.Module):
    """Stem, two blocks and a pooled classifier (section ${tag})."""

    def __init__(self, num_classes=${2 + (tag % 9)}):
        super().__init__()
        self.stem = nn.Conv2d(3, 32, kernel_size=5, stride=2, padding=2${bias})
        self.bn = nn.BatchNorm2d(32, momentum=0.1)
        self.blocks = nn.Sequential(*[Block${tag}(32, 32) for _ in range(2)])
        self.pool = nn.AdaptiveAvgPool2d(1)
        self.drop = nn.Dropout(0.${1 + (tag % 4)})
        self.fc = nn.Linear(32, num_classes)

    def forward(self, x):
        x = F.relu(self.bn(self.stem(x)))
        x = self.blocks(x)
        x = torch.flatten(self.pool(x), 1)
        return self.fc(self.drop(x))
`;
}

let text = '"""Generated for the latency benchmark: many small CNNs in one module."""\n\nimport torch\nimport torch.nn as nn\nimport torch.nn.functional as F\n';
for (let tag = 0; text.split('\n').length < TARGET_LINES; tag++) text += section(tag);
const lines = text.split('\n');

const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'regwise-lsp-bench-'));
const file = path.join(dir, 'many_models.py');
fs.writeFileSync(file, text);
const keep = process.argv.indexOf('--save');
if (keep > 0) fs.writeFileSync(process.argv[keep + 1], text);
const uri = pathToFileURL(file).href;

// REGWISE_SERVER_NODE_ARGS: extra node flags for the server process (e.g. --cpu-prof to find where time goes)
const nodeArgs = (process.env.REGWISE_SERVER_NODE_ARGS ?? '').split(' ').filter(Boolean);
const proc = spawn(process.execPath, [...nodeArgs, server, '--stdio'], { stdio: ['pipe', 'pipe', 'inherit'] });
const conn = lsp.createProtocolConnection(new lsp.StreamMessageReader(proc.stdout), new lsp.StreamMessageWriter(proc.stdin));
const waiting = new Map();
let lastCount = 0;
conn.onNotification(lsp.PublishDiagnosticsNotification.type, (p) => {
  if (p.uri !== uri) return;
  const w = waiting.get(p.version);
  if (w) {
    waiting.delete(p.version);
    lastCount = p.diagnostics.length;
    w(performance.now());
  }
});
conn.onRequest('window/workDoneProgress/create', () => null);
conn.onRequest('client/registerCapability', () => null);
conn.listen();

const forVersion = (v) =>
  new Promise((resolve, reject) => {
    const t = setTimeout(() => reject(new Error(`no diagnostics for version ${v} within ${TIMEOUT_MS} ms`)), TIMEOUT_MS);
    waiting.set(v, (at) => {
      clearTimeout(t);
      resolve(at);
    });
  });

function rssKb(pid) {
  const m = /VmRSS:\s+(\d+) kB/.exec(fs.readFileSync(`/proc/${pid}/status`, 'utf8'));
  return m ? Number(m[1]) : NaN;
}

const pct = (xs, p) => {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.min(s.length - 1, Math.ceil((p / 100) * s.length) - 1)];
};

try {
  await conn.sendRequest(lsp.InitializeRequest.type, {
    processId: process.pid,
    rootUri: pathToFileURL(dir).href,
    workspaceFolders: [{ uri: pathToFileURL(dir).href, name: 'bench' }],
    capabilities: { textDocument: { publishDiagnostics: { versionSupport: true, relatedInformation: true } } },
    initializationOptions: DEBOUNCE !== undefined ? { debounceMs: DEBOUNCE } : undefined,
  });
  await conn.sendNotification(lsp.InitializedNotification.type, {});
  const t0 = performance.now();
  const first = forVersion(1);
  await conn.sendNotification(lsp.DidOpenTextDocumentNotification.type, { textDocument: { uri, languageId: 'python', version: 1, text } });
  const firstAt = await first;
  console.log(`file: ${lines.length} lines, ${text.length} chars; first diagnostics after open: ${(firstAt - t0).toFixed(1)} ms (${lastCount} diagnostics)`);

  // edits at places spread over the file: a space appended to a line, so the program stays valid
  const cur = [...lines];
  const times = [];
  for (let i = 0; i < EDITS; i++) {
    const line = Math.min(cur.length - 1, Math.floor(((i * 7919) % EDITS) * (cur.length / EDITS)) + 5);
    const at = { line, character: cur[line].length };
    cur[line] += ' ';
    const version = i + 2;
    const got = forVersion(version);
    const sent = performance.now();
    await conn.sendNotification(lsp.DidChangeTextDocumentNotification.type, { textDocument: { uri, version }, contentChanges: [{ range: { start: at, end: at }, text: ' ' }] });
    times.push((await got) - sent);
  }
  const rss = rssKb(proc.pid);
  console.log(`${EDITS} single-character edits, didChange → publishDiagnostics of that version (debounce ${DEBOUNCE ?? 'default'}):`);
  console.log(`  p50 ${pct(times, 50).toFixed(1)} ms   p95 ${pct(times, 95).toFixed(1)} ms   max ${Math.max(...times).toFixed(1)} ms   (${lastCount} diagnostics at the end)`);
  console.log(`  server RSS ${(rss / 1024).toFixed(0)} MB`);
  console.log('  target (issue 6): p95 <= 50 ms on this machine');
} finally {
  await conn.sendRequest(lsp.ShutdownRequest.type).catch(() => undefined);
  await conn.sendNotification(lsp.ExitNotification.type).catch(() => undefined);
  conn.dispose();
  setTimeout(() => proc.kill(), 500).unref();
  fs.rmSync(dir, { recursive: true, force: true });
}
