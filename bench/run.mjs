// `npm run bench`: writes a seeded corpus at three sizes, then times parse-only, `scan --jobs 1` and `scan --jobs 2` on each.
// Usage: node bench/run.mjs [--sizes 100000,250000,500000] [--seed 7] [--timeout 1800] [--reuse] [--cli dist/cli.js]
// (REGWISE_PARALLEL=rules in the environment measures the opt-in mode that also runs the rules in the workers.)
import { spawn } from 'node:child_process';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { generateCorpus } from './gen.mjs';

const here = path.dirname(fileURLToPath(import.meta.url));
const root = path.resolve(here, '..');
const args = process.argv.slice(2);
const opt = (name, def) => {
  const i = args.indexOf(`--${name}`);
  return i >= 0 ? args[i + 1] : def;
};
const sizes = opt('sizes', '100000,250000,500000').split(',').map(Number);
const seed = Number(opt('seed', '7'));
const timeoutS = Number(opt('timeout', '1800'));
const reuse = args.includes('--reuse');
const cli = path.resolve(root, opt('cli', path.join('dist', 'cli.js')));
if (!fs.existsSync(cli)) {
  console.error('bench: dist/cli.js is missing; run `npm run build` first');
  process.exit(2);
}

/** Runs a child to the end; wall time from here, peak RSS and phases from the child's own report. */
function run(cmd, argv, env = {}) {
  return new Promise((resolve) => {
    const t0 = process.hrtime.bigint();
    const child = spawn(cmd, argv, { cwd: root, env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    let err = '';
    child.stdout.on('data', (d) => (out += d));
    child.stderr.on('data', (d) => (err += d));
    const timer = setTimeout(() => child.kill('SIGKILL'), timeoutS * 1000);
    child.on('close', (code, signal) => {
      clearTimeout(timer);
      resolve({ code, signal, ms: Number(process.hrtime.bigint() - t0) / 1e6, out, err });
    });
  });
}

async function parseOnly(dir) {
  const r = await run(process.execPath, [path.join(here, 'parse-only.cjs'), dir]);
  if (r.code !== 0) throw new Error(`parse-only failed: ${r.err}`);
  return JSON.parse(r.out);
}

async function scan(dir, jobs) {
  const r = await run(process.execPath, [cli, 'scan', dir, '--format', 'json', '--output', '/dev/null', '--fail-level', 'never', '--jobs', String(jobs)], { REGWISE_STATS: '1', CI: 'true' });
  if (r.signal) return { timedOut: true, ms: r.ms };
  if (r.code !== 0) throw new Error(`scan --jobs ${jobs} failed (${r.code}): ${r.err.slice(-2000)}`);
  const stats = JSON.parse(/regwise-stats (.*)/.exec(r.err)[1]);
  return { ms: r.ms, maxRssKB: stats.maxRssKB, files: stats.files, workers: stats.workers, phases: stats.phases };
}

const fmtS = (ms) => (ms / 1000).toFixed(2);
const rows = [];
for (const size of sizes) {
  const dir = path.join(here, 'corpus', String(size));
  let info;
  if (reuse && fs.existsSync(path.join(dir, 'corpus.json'))) info = JSON.parse(fs.readFileSync(path.join(dir, 'corpus.json'), 'utf8'));
  else {
    info = generateCorpus(dir, size, seed + size);
    fs.writeFileSync(path.join(dir, 'corpus.json'), JSON.stringify(info));
  }
  console.error(`bench: ${size}: ${info.lines} lines in ${info.files} files; measuring...`);
  const p = await parseOnly(dir);
  const j1 = await scan(dir, 1);
  const j2 = await scan(dir, 2);
  const row = { size, lines: info.lines, files: info.files, parseMs: p.ms, parseRssKB: p.maxRssKB, j1, j2 };
  rows.push(row);
  console.error(`bench: ${size}: parse ${fmtS(p.ms)} s, jobs 1 ${j1.timedOut ? 'timed out' : `${fmtS(j1.ms)} s`}, jobs 2 ${j2.timedOut ? 'timed out' : `${fmtS(j2.ms)} s`}`);
}

const line = (cells) => `| ${cells.join(' | ')} |`;
const out = [];
out.push(line(['lines', 'files', 'parse-only s', 'scan -j1 s', 'scan -j2 s', 'j1 / parse', 'j1 / j2', 'lines/s j1', 'lines/s j2', 'peak RSS j1 MB', 'peak RSS j2 MB', 'µs/line j1', 'µs/line j2']));
out.push(line(Array(13).fill('---')));
for (const r of rows) {
  const t1 = r.j1.timedOut ? NaN : r.j1.ms;
  const t2 = r.j2.timedOut ? NaN : r.j2.ms;
  out.push(line([
    r.lines, r.files, fmtS(r.parseMs),
    r.j1.timedOut ? `>${timeoutS}` : fmtS(t1), r.j2.timedOut ? `>${timeoutS}` : fmtS(t2),
    (t1 / r.parseMs).toFixed(2), (t1 / t2).toFixed(2),
    Math.round(r.lines / (t1 / 1000)), Math.round(r.lines / (t2 / 1000)),
    r.j1.maxRssKB ? (r.j1.maxRssKB / 1024).toFixed(0) : '-', r.j2.maxRssKB ? (r.j2.maxRssKB / 1024).toFixed(0) : '-',
    ((t1 * 1000) / r.lines).toFixed(1), ((t2 * 1000) / r.lines).toFixed(1),
  ]));
}
const perLine = rows.filter((r) => !r.j1.timedOut).map((r) => r.j1.ms / r.lines);
if (perLine.length > 1) {
  const spread = (Math.max(...perLine) / Math.min(...perLine) - 1) * 100;
  out.push('', `per-line cost spread across sizes (jobs 1): ${spread.toFixed(0)}% (max/min - 1)`);
}
out.push('', `targets: scan -j1 ≤ 1.6× parse-only; j1/j2 ≥ 1.7; peak RSS ≤ 400 MB at 500k lines; per-line cost within 15% across sizes`);
console.log(out.join('\n'));
fs.mkdirSync(path.join(here, 'corpus'), { recursive: true });
fs.writeFileSync(path.join(here, 'corpus', 'results.json'), `${JSON.stringify({ seed, rows, node: process.version, cpus: (await import('node:os')).cpus().length }, null, 2)}\n`);
