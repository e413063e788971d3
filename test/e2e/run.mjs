// End-to-end in real VS Code (code-server 4.100.3 in headless Debian Chromium, driven by playwright-core): installs
// the packaged .vsix, opens a sample, waits for the squiggle and the Problems entry, checks the hover, applies the
// quick-fix with Ctrl+., saves, and checks the file on disk. Screenshots go to test-artifacts/e2e/.
// Usage: node test/e2e/run.mjs [--no-package]   (runs test/e2e/setup.sh first; it reuses its cache)
import { execFileSync, spawn } from 'node:child_process';
import * as fs from 'node:fs';
import * as net from 'node:net';
import * as os from 'node:os';
import * as path from 'node:path';
import { chromium } from 'playwright-core';

const repo = path.resolve(path.dirname(new URL(import.meta.url).pathname), '..', '..');
const cache = process.env.REGWISE_E2E_CACHE || path.join(os.homedir(), '.cache', 'regwise-e2e');
const codeServer = path.join(cache, 'code-server-4.100.3', 'node_modules', '.bin', 'code-server');
const artifacts = path.join(repo, 'test-artifacts', 'e2e');
const vsix = path.join(repo, 'dist', 'regwise.vsix');
const MESSAGE = 'has a bias that BatchNorm2d `bn` (models.py:37) cancels';
const started = Date.now();
const steps = [];

function log(msg) {
  const line = `[e2e ${((Date.now() - started) / 1000).toFixed(1)}s] ${msg}`;
  steps.push(line);
  console.log(line);
}

function freePort() {
  return new Promise((resolve, reject) => {
    const s = net.createServer();
    s.listen(0, '127.0.0.1', () => {
      const { port } = s.address();
      s.close(() => resolve(port));
    });
    s.on('error', reject);
  });
}

async function waitHealthy(url, ms) {
  const until = Date.now() + ms;
  while (Date.now() < until) {
    try {
      const r = await fetch(url);
      if (r.ok) return;
    } catch {
      // not up yet
    }
    await new Promise((r) => setTimeout(r, 250));
  }
  throw new Error(`code-server did not answer ${url} within ${ms} ms`);
}

const normalise = (s) => (s ?? '').replace(/\u00a0/g, ' ');

fs.mkdirSync(artifacts, { recursive: true });
for (const f of fs.readdirSync(artifacts)) if (f.endsWith('.png') || f.endsWith('.log')) fs.rmSync(path.join(artifacts, f));

execFileSync('bash', [path.join(repo, 'test', 'e2e', 'setup.sh')], { stdio: 'inherit' });
if (!process.argv.includes('--no-package') || !fs.existsSync(vsix)) {
  log('packaging the extension (npm run package)');
  execFileSync('npm', ['run', '--silent', 'package'], { cwd: repo, stdio: ['ignore', 'ignore', 'inherit'] });
}

// all editor state in a fresh folder
const R = fs.mkdtempSync(path.join(os.tmpdir(), 'regwise-e2e-'));
// the workspace holds the package as a repository does, so the training scripts' imports of it resolve
const ws = path.join(R, 'field-models');
fs.cpSync(path.join(repo, 'samples', 'pollinator_cnn'), path.join(ws, 'pollinator_cnn'), { recursive: true });
fs.cpSync(path.join(repo, 'samples', 'hive_health'), path.join(ws, 'hive_health'), { recursive: true });
const modelsPy = path.join(ws, 'pollinator_cnn', 'models.py');
const before = fs.readFileSync(modelsPy, 'utf8');
const userDir = path.join(R, 'data', 'User');
fs.mkdirSync(userDir, { recursive: true });
fs.writeFileSync(path.join(userDir, 'settings.json'), JSON.stringify({
  'workbench.startupEditor': 'none',
  'update.mode': 'none',
  'telemetry.telemetryLevel': 'off',
  'extensions.autoUpdate': false,
  'extensions.autoCheckUpdates': false,
  'extensions.ignoreRecommendations': true,
  'workbench.tips.enabled': false,
  'workbench.enableExperiments': false,
  'security.workspace.trust.enabled': false,
  'editor.hover.delay': 200,
  'files.autoSave': 'off',
  'window.commandCenter': false,
}, null, 2));
fs.writeFileSync(path.join(R, 'config.yaml'), 'auth: none\ncert: false\n');
const env = { ...process.env, XDG_CONFIG_HOME: path.join(R, 'xc'), XDG_DATA_HOME: path.join(R, 'xd') };

log('installing the .vsix into a fresh extensions folder');
execFileSync(codeServer, ['--install-extension', vsix, '--extensions-dir', path.join(R, 'ext'), '--user-data-dir', path.join(R, 'data')], { env, stdio: ['ignore', 'ignore', 'inherit'] });

const port = await freePort();
const serverLog = fs.openSync(path.join(artifacts, 'code-server.log'), 'w');
const cs = spawn(codeServer, [
  '--config', path.join(R, 'config.yaml'), '--bind-addr', `127.0.0.1:${port}`, '--auth', 'none', '--disable-telemetry', '--disable-update-check',
  '--disable-workspace-trust', '--disable-getting-started-override', '--user-data-dir', path.join(R, 'data'), '--extensions-dir', path.join(R, 'ext'), ws,
], { env, detached: true, stdio: ['ignore', serverLog, serverLog] });
const stopServer = () => {
  try {
    process.kill(-cs.pid, 'SIGTERM');
  } catch {
    // already gone
  }
};
process.on('exit', stopServer);

let context;
let page;
let failed;
const shot = async (name) => {
  await page.screenshot({ path: path.join(artifacts, `${name}.png`) });
  log(`screenshot ${name}.png`);
};

try {
  await waitHealthy(`http://127.0.0.1:${port}/healthz`, 60_000);
  log(`code-server up on port ${port}`);
  context = await chromium.launchPersistentContext(path.join(R, 'browser'), {
    executablePath: '/usr/bin/chromium',
    headless: true,
    viewport: { width: 1400, height: 900 },
    args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'],
    env: { ...process.env, XDG_CONFIG_HOME: path.join(R, 'browser-xc') },
  });
  page = context.pages()[0] ?? (await context.newPage());
  page.setDefaultTimeout(60_000);
  await page.goto(`http://127.0.0.1:${port}/?folder=${encodeURIComponent(ws)}`);
  await page.waitForSelector('.monaco-workbench');
  log('workbench loaded');
  await shot('01-workbench');

  // open models.py from the explorer (expand the package folder first)
  await page.locator('.explorer-folders-view .monaco-list-row', { hasText: /^pollinator_cnn$/ }).first().click();
  const row = page.locator('.explorer-folders-view .monaco-list-row', { hasText: /^models\.py$/ });
  await row.first().click();
  await page.waitForSelector('.monaco-editor .view-lines');
  await page.locator('.tab', { hasText: 'models.py' }).first().waitFor();
  log('models.py open');

  // go to the stem convolution (line 36) so the squiggle is on screen
  const goto = async (where) => {
    await page.locator('.monaco-editor .view-lines').first().click();
    await page.keyboard.press('Control+G');
    await page.keyboard.type(where);
    await page.keyboard.press('Enter');
  };
  await goto('36:25');
  await page.waitForSelector('.monaco-editor .squiggly-warning', { timeout: 90_000 });
  log('squiggle shown');
  await page.waitForSelector('#status\\.problems');
  await shot('02-squiggle');

  // the Problems panel lists Regwise's message
  await page.keyboard.press('Control+Shift+M');
  const entry = page.locator('.markers-panel .monaco-list-row', { hasText: 'bias-before-norm' });
  await entry.first().waitFor();
  const entryText = normalise(await page.locator('.markers-panel').innerText());
  if (!entryText.includes(MESSAGE.slice(0, 40))) throw new Error(`Problems panel lacks the message; it shows:\n${entryText}`);
  log('Problems entry found');
  await shot('03-problems');

  // hover over the layer: what Regwise knows about it
  await goto('36:25');
  await page.keyboard.press('Control+K');
  await page.keyboard.press('Control+I');
  // the diagnostic's part of the hover comes first; wait for the server's part (the layer's qualified name)
  const hover = page.locator('.monaco-hover:not(.hidden)', { hasText: 'PollinatorNet.backbone.stem.conv' });
  await hover.first().waitFor();
  const hoverText = normalise(await hover.first().innerText());
  for (const want of ['PollinatorNet.backbone.stem.conv', 'torch.nn.Conv2d(in_channels=3, out_channels=32', 'bias-before-norm']) {
    if (!hoverText.includes(want)) throw new Error(`hover lacks ${JSON.stringify(want)}; it shows:\n${hoverText}`);
  }
  log('hover shows the layer');
  await shot('04-hover');
  await page.keyboard.press('Escape');

  // the quick-fix menu with Ctrl+. ; choose Regwise's fix and apply it
  await goto('36:25');
  await page.keyboard.press('Control+.');
  const item = page.locator('.action-widget .monaco-list-row', { hasText: 'Pass bias=False to `conv`' });
  await item.first().waitFor();
  const menu = normalise(await page.locator('.action-widget').innerText());
  log(`quick-fix menu: ${menu.split('\n').filter(Boolean).join(' | ')}`);
  await shot('05-quickfix-menu');
  // move the keyboard focus to Regwise's fix (the preferred one is focused first), then apply it with Enter
  for (let i = 0; i < 6 && !((await item.first().getAttribute('class')) ?? '').includes('focused'); i++) await page.keyboard.press('ArrowDown');
  if (!((await item.first().getAttribute('class')) ?? '').includes('focused')) throw new Error('could not focus the quick-fix entry');
  await page.keyboard.press('Enter');
  await page.keyboard.press('Control+S');
  const want = before.replace('padding=2)\n        self.bn', 'padding=2, bias=False)\n        self.bn');
  if (want === before) throw new Error('the sample changed: the expected fixed text could not be built');
  const until = Date.now() + 20_000;
  while (fs.readFileSync(modelsPy, 'utf8') !== want) {
    if (Date.now() > until) throw new Error(`models.py on disk is not the fixed text:\n${fs.readFileSync(modelsPy, 'utf8').split('\n').slice(33, 40).join('\n')}`);
    await new Promise((r) => setTimeout(r, 200));
  }
  log('saved file on disk has bias=False');
  // and the Problems entry for the stem goes away
  await page.waitForFunction((msg) => !document.querySelector('.markers-panel')?.textContent?.replace(/\u00a0/g, ' ').includes(msg), MESSAGE, { timeout: 30_000 });
  log('the finding is gone from the Problems panel');
  await shot('06-fixed');

  // a contributed command from the palette: the model structure of the open file, from the server
  await page.locator('.monaco-editor .view-lines').first().click();
  await page.keyboard.press('F1');
  await page.keyboard.type('Regwise: Show model structure');
  await page.locator('.quick-input-list .monaco-list-row', { hasText: 'Regwise: Show model structure' }).first().waitFor();
  await page.keyboard.press('Enter');
  const structure = page.locator('.monaco-editor .view-lines', { hasText: 'PollinatorBackbone' });
  await structure.first().waitFor();
  const shown = normalise(await structure.first().innerText());
  if (!/stem\.conv\s+nn\.Conv2d/.test(shown)) throw new Error(`model structure lacks the stem conv:\n${shown}`);
  log('Show model structure opened the layer table');
  await shot('07-model-structure');

  // a notebook: the cells are analysed as one program and the squiggle lands in the cell that fits the scaler
  await page.locator('.explorer-folders-view .monaco-list-row', { hasText: /^hive_health$/ }).first().click();
  await page.locator('.explorer-folders-view .monaco-list-row', { hasText: /^explore\.ipynb$/ }).first().click();
  const cell = page.locator('.notebook-editor .code-cell-row', { has: page.locator('.squiggly-warning') });
  await cell.first().waitFor({ timeout: 90_000 });
  const cellText = normalise(await cell.first().innerText());
  if (!cellText.includes('X_scaled = scaler.fit_transform(X)')) throw new Error(`the squiggle is in the wrong cell:\n${cellText}`);
  const nbEntry = page.locator('.markers-panel .monaco-list-row', { hasText: 'norm-fit-before-split' });
  await nbEntry.first().waitFor();
  // cell numbers in messages count every cell (markdown too), as the editor's own "Cell N of M" does
  const nbMessage = normalise(await nbEntry.first().innerText());
  if (!nbMessage.includes('explore.ipynb cell 3, line 2')) throw new Error(`the notebook message names another cell:\n${nbMessage}`);
  // bring the cell to the middle of the notebook view for the screenshot (the list scrolls itself, not the page)
  await cell.first().locator('.monaco-editor .view-lines').first().click();
  await page.keyboard.press('Escape');
  await page.keyboard.press('Control+L');
  log('notebook: squiggle in the scaler cell, Problems entry norm-fit-before-split');
  await shot('08-notebook');
} catch (err) {
  failed = err;
  if (page) await shot('99-failure').catch(() => undefined);
} finally {
  await context?.close().catch(() => undefined);
  stopServer();
  fs.writeFileSync(path.join(artifacts, 'steps.log'), `${steps.join('\n')}\n`);
}
if (failed) {
  console.error(`e2e FAILED: ${failed.stack ?? failed}`);
  console.log('0 passed, 1 failed');
  process.exit(1);
}
if (process.env.REGWISE_E2E_KEEP) log(`kept the editor state in ${R}`);
else fs.rmSync(R, { recursive: true, force: true });
log(`e2e passed in ${((Date.now() - started) / 1000).toFixed(0)} s`);
console.log('1 passed, 0 failed');
