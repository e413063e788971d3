// The `regwise` command line: scan, model, rules, explain. Reports go to stdout (or --output), logs to stderr.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { loadPythonParser } from '../engine/parser';
import { Engine } from '../engine/engine';
import { Views } from '../engine/views';
import { show } from '../engine/values';
import { INTERNAL_RULE, compareFindings } from '../engine/engine';
import { LEVEL_RANK, type Finding, type FixKind } from '../engine/types';
import { RULES, ruleById } from '../../../rules/index';
import { collect, loadTree, sourceOf, walk } from './load';
import { ConfigError, defaultConfig, discoverConfig, engineOptions, loadConfig, nearest, type ScanConfig } from './config';
import { Baseline, BaselineError, baselinePath, writeBaseline } from './baseline';
import { changedSince, GitError } from './git';
import { fingerprints } from './fingerprint';
import { applyFixesToFiles } from './fixer';
import { analyzeInWorkers, defaultJobs, factsInWorkers, workerScript } from './pool';
import { Progress } from './progress';
import { displayPath, jsonReport, summarize, toReportFinding, type Report } from './report';
import { sarifReport } from './sarif';
import { chooseStyle, textReport } from './text';
import { VERSION } from './version';

export class UsageError extends Error {}

export interface Io {
  out: (s: string) => void;
  err: (s: string) => void;
  /** Whether stdout / stderr are terminals (colour, progress bar). */
  outTty?: boolean;
  errTty?: boolean;
  errColumns?: number;
  env?: NodeJS.ProcessEnv;
}

const HELP = `regwise ${VERSION}: static checks for regularization and normalization mistakes in deep-learning code

usage:
  regwise scan [PATH...]       scan .py and .ipynb files (default: the current folder)
      --format text|json|sarif     report format (default text)
      --output FILE                write the report to FILE instead of stdout
      --fail-level LEVEL           error|warning|info|never: exit 1 when a finding is at or above it (default warning)
      --fix                        apply safe fixes to the files
      --fix-suggested              also apply suggested fixes
      --baseline FILE              do not report findings recorded in FILE
      --write-baseline FILE        record the current findings in FILE
      --changed-since GITREF       report only files changed since GITREF (all files are still analysed)
      --config FILE                use this regwise.toml / pyproject.toml instead of looking for one
      --jobs N                     worker threads for parsing (default: number of cores)
  regwise model FILE[:CLASS] [--format text|json]
  regwise rules
  regwise explain RULE

exit codes: 0 no finding at or above --fail-level, 1 findings at or above it, 2 usage, config or internal error
`;

const defaultIo = (): Io => ({
  out: (s) => process.stdout.write(s),
  err: (s) => process.stderr.write(s),
  outTty: process.stdout.isTTY,
  errTty: process.stderr.isTTY,
  errColumns: process.stderr.columns,
  env: process.env,
});

export async function main(argv: string[], io: Io = defaultIo()): Promise<number> {
  const [cmd, ...rest] = argv;
  try {
    switch (cmd) {
      case 'scan': return await scan(rest, io);
      case 'model': return await model(rest, io);
      case 'rules': return rules(io);
      case 'explain': return explain(rest, io);
      case '--version': case 'version': io.out(`${VERSION}\n`); return 0;
      case undefined: case '-h': case '--help': case 'help': io.out(HELP); return cmd === undefined ? 2 : 0;
      default: throw new UsageError(`unknown command '${cmd}'`);
    }
  } catch (err) {
    if (err instanceof UsageError) {
      io.err(`regwise: ${err.message}\n\n${HELP}`);
      return 2;
    }
    if (err instanceof ConfigError || err instanceof BaselineError || err instanceof GitError) {
      io.err(`regwise: ${err.message}\n`);
      return 2;
    }
    io.err(`regwise: internal error: ${err instanceof Error ? err.stack ?? err.message : String(err)}\n`);
    return 2;
  }
}

interface Flags {
  positional: string[];
  values: Map<string, string>;
  switches: Set<string>;
}

function parseFlags(args: string[], valued: string[], switches: string[]): Flags {
  const f: Flags = { positional: [], values: new Map(), switches: new Set() };
  for (let i = 0; i < args.length; i++) {
    const a = args[i];
    if (a === '--') {
      f.positional.push(...args.slice(i + 1));
      break;
    }
    if (a.startsWith('--')) {
      const [name, inline] = a.slice(2).split(/=(.*)/s, 2);
      if (valued.includes(name)) {
        const v = inline ?? args[++i];
        if (v === undefined) throw new UsageError(`--${name} needs a value`);
        f.values.set(name, v);
      } else if (switches.includes(name)) {
        if (inline !== undefined) throw new UsageError(`--${name} takes no value`);
        f.switches.add(name);
      } else {
        const near = nearest(name, [...valued, ...switches]);
        throw new UsageError(`unknown option --${name}${near ? ` (did you mean --${near}?)` : ''}`);
      }
    } else f.positional.push(a);
  }
  return f;
}

function choice(v: string | undefined, allowed: string[], name: string, def: string): string {
  const x = v ?? def;
  if (!allowed.includes(x)) throw new UsageError(`--${name} must be one of ${allowed.join(', ')} (got '${x}')`);
  return x;
}

export async function newEngine(): Promise<Engine> {
  return new Engine(await loadPythonParser(), RULES);
}

const FAIL_RANK: Record<string, number> = { error: LEVEL_RANK.error, warning: LEVEL_RANK.warning, info: LEVEL_RANK.info, never: Infinity };

/** The config in force: `--config FILE`, else the nearest regwise.toml / [tool.regwise] above the first path. */
function resolveConfig(explicit: string | undefined, firstRoot: string): ScanConfig {
  const ids = RULES.map((r) => r.meta.id);
  if (explicit) {
    if (!fs.existsSync(explicit)) throw new UsageError(`--config: no such file: ${explicit}`);
    return loadConfig(explicit, ids, explicit);
  }
  const found = discoverConfig(firstRoot);
  if (!found) return defaultConfig(process.cwd());
  return loadConfig(found, ids, path.relative(process.cwd(), found) || found);
}

/** Runs the rules file by file (for progress) with one shared Views; same dedupe and order as one analyze call. */
function analyzeAll(engine: Engine, paths: readonly string[], progress: Progress): Finding[] {
  const views = new Views(engine.ws);
  return mergeFindings(paths.map((p, i) => {
    const found = engine.analyze([p], views);
    progress.update('analysing', i + 1, paths.length);
    return found;
  }));
}

function countLines(text: string): number {
  let n = 0;
  for (let i = text.indexOf('\n'); i !== -1; i = text.indexOf('\n', i + 1)) n++;
  return n;
}

/** Per-file results in file order → one list: first copy of each finding kept, sorted stably (as Engine.analyze does). */
function mergeFindings(perFile: readonly Finding[][]): Finding[] {
  const seen = new Set<string>();
  const out: Finding[] = [];
  for (const list of perFile) {
    for (const f of list) {
      const key = `${f.rule}\0${f.path}\0${f.span.start}\0${f.span.end}\0${f.messageId}`;
      if (seen.has(key)) continue;
      seen.add(key);
      out.push(f);
    }
  }
  return out.sort(compareFindings);
}

async function scan(args: string[], io: Io): Promise<number> {
  const started = Date.now();
  const flags = parseFlags(args, ['format', 'output', 'fail-level', 'baseline', 'write-baseline', 'changed-since', 'config', 'jobs'], ['fix', 'fix-suggested']);
  const format = choice(flags.values.get('format'), ['text', 'json', 'sarif'], 'format', 'text');
  const failLevel = choice(flags.values.get('fail-level'), ['error', 'warning', 'info', 'never'], 'fail-level', 'warning');
  const jobsFlag = flags.values.get('jobs');
  if (jobsFlag !== undefined && !/^[1-9]\d*$/.test(jobsFlag)) throw new UsageError(`--jobs must be a positive whole number (got '${jobsFlag}')`);
  const jobs = jobsFlag ? Math.min(64, Number(jobsFlag)) : defaultJobs();
  const fixKind: FixKind | undefined = flags.switches.has('fix-suggested') ? 'suggested' : flags.switches.has('fix') ? 'safe' : undefined;
  const roots = flags.positional.length ? flags.positional : ['.'];
  for (const r of roots) if (!fs.existsSync(r)) throw new UsageError(`no such file or folder: ${r}`);
  const env = io.env ?? {};
  const progress = new Progress({ isTTY: io.errTty, columns: io.errColumns, write: io.err }, env);

  const cfg = resolveConfig(flags.values.get('config'), roots[0]);
  const baseline = flags.values.has('baseline') ? Baseline.read(flags.values.get('baseline')!) : undefined;
  const changed = flags.values.has('changed-since') ? changedSince(process.cwd(), flags.values.get('changed-since')!) : undefined;

  const engine = await newEngine();
  engine.configure(engineOptions(cfg));
  const root = process.cwd();
  const collected = collect(root, walk(roots, { dir: cfg.dir, include: cfg.include, exclude: cfg.exclude }));
  const tRead = Date.now();
  const sources = collected.sources.map(sourceOf);
  const paths = sources.map((s) => s.path);
  const script = workerScript();
  let workers = 0;
  const lines = sources.reduce((n, s) => n + countLines(s.text), 0);
  // workers extract facts; REGWISE_PARALLEL=rules also spreads the rule checks over them (see pool.ts for why opt-in)
  const parallel = jobs > 1 && script && sources.length > 1 ? (env.REGWISE_PARALLEL === 'rules' ? 'rules' : 'facts') : undefined;
  let findings: Finding[];
  // the main thread's engine: filled now unless workers ran the rules; then only if --fix needs it
  let mainLoaded = true;
  const loadMain = () => {
    for (const d of collected.data) engine.setDataFile(d.rel, d.text);
    for (const s of sources) engine.setSource(s);
  };
  if (parallel === 'rules') {
    const r = await analyzeInWorkers(script!, jobs, sources, collected.data, engineOptions(cfg), paths, (phase, done, total) => progress.update(phase, done, total));
    workers = r.workers;
    findings = mergeFindings(r.findings);
    mainLoaded = false;
  } else {
    for (const d of collected.data) engine.setDataFile(d.rel, d.text);
    if (parallel === 'facts') {
      const r = await factsInWorkers(script!, jobs, sources.map((s) => s.text), (done) => progress.update('parsing', done, sources.length));
      workers = r.workers;
      sources.forEach((s, i) => engine.setFileFacts(s, r.facts[i]));
    } else {
      sources.forEach((s, i) => {
        engine.setSource(s);
        progress.update('parsing', i + 1, sources.length);
      });
    }
    findings = analyzeAll(engine, paths, progress);
  }
  const tRules = Date.now();
  progress.done();
  for (const s of collected.skipped) io.err(`regwise: skipped ${s.path}: ${s.reason}\n`);
  const byPath = new Map(sources.map((s) => [s.path, s]));
  const src = (p: string) => (mainLoaded ? engine.ws.get(p)?.source : byPath.get(p));

  const inChanged = (rel: string) => !changed || changed.has(path.resolve(root, rel));
  if (fixKind) {
    if (!mainLoaded) {
      loadMain();
      mainLoaded = true;
    }
    const targets = collected.sources.filter((s) => inChanged(s.rel));
    const outcome = applyFixesToFiles(engine, targets, findings, fixKind);
    for (const a of outcome.applied) io.err(`regwise: fixed ${displayPath(root, a.path)}:${a.cell !== undefined ? `cell ${a.cell}:` : ''}${a.line} ${a.rule}: ${a.title}\n`);
    for (const r of outcome.refused) io.err(`regwise: not fixed ${displayPath(root, r.path)}: ${r.reason}\n`);
    io.err(`regwise: ${outcome.applied.length} fix${outcome.applied.length === 1 ? '' : 'es'} applied in ${outcome.changed.length} file${outcome.changed.length === 1 ? '' : 's'}\n`);
    if (outcome.changed.length) findings = analyzeAll(engine, paths, progress);
  }
  if (changed) findings = findings.filter((f) => inChanged(f.path));

  const textOf = (p: string) => src(p)?.text ?? '';
  const prints = fingerprints(findings, textOf, (p) => displayPath(root, p));
  const entryOf = (f: Finding, i: number, file: string) => ({ rule: f.rule, path: baselinePath(file, path.resolve(root, f.path)), hash: prints[i].code });
  const writeTo = flags.values.get('write-baseline');
  if (writeTo) {
    const entries = findings.map((f, i) => ({ f, i })).filter(({ f }) => f.rule !== INTERNAL_RULE).map(({ f, i }) => entryOf(f, i, writeTo));
    writeBaseline(writeTo, entries);
    io.err(`regwise: wrote ${entries.length} finding${entries.length === 1 ? '' : 's'} to the baseline ${writeTo}\n`);
  }
  let kept = findings.map((f, i) => ({ f, i }));
  let baselined = 0;
  if (baseline) {
    const file = flags.values.get('baseline')!;
    kept = kept.filter(({ f, i }) => {
      if (f.rule === INTERNAL_RULE || !baseline.take(entryOf(f, i, file))) return true;
      baselined++;
      return false;
    });
  }
  if (writeTo) {
    // what was just recorded is known from now on: this run passes unless something could not be recorded
    baselined += kept.filter(({ f }) => f.rule !== INTERNAL_RULE).length;
    kept = kept.filter(({ f }) => f.rule === INTERNAL_RULE);
  }
  const shown = kept.map(({ f }) => f);
  const reportFindings = kept.map(({ f, i }) => toReportFinding(src, root, f, prints[i].full));
  const report: Report = { findings: reportFindings, skipped: collected.skipped, summary: summarize(reportFindings, collected.skipped, baselined) };
  const outFile = flags.values.get('output');
  const style = chooseStyle(!outFile && !!io.outTty, env);
  const text = format === 'json' ? jsonReport(report)
    : format === 'sarif' ? sarifReport(src, report, shown, RULES, readDoc, root)
    : textReport(src, report, shown, style);
  if (outFile) fs.writeFileSync(outFile, text);
  else io.out(text);
  if (env.REGWISE_STATS) {
    const phases = { walkRead: tRead - started, analyse: tRules - tRead, rest: Date.now() - tRules };
    io.err(`regwise-stats ${JSON.stringify({ ms: Date.now() - started, phases, files: paths.length, lines, maxRssKB: process.resourceUsage().maxRSS, jobs, workers, parallel: parallel ?? 'none' })}\n`);
  }
  const threshold = FAIL_RANK[failLevel];
  return shown.some((f) => LEVEL_RANK[f.level] >= threshold) ? 1 : 0;
}

async function model(args: string[], io: Io): Promise<number> {
  const flags = parseFlags(args, ['format'], []);
  const format = choice(flags.values.get('format'), ['text', 'json'], 'format', 'text');
  const target = flags.positional[0];
  if (!target) throw new UsageError('model needs FILE[:CLASS]');
  const m = /^(.*?)(?::([A-Za-z_]\w*))?$/.exec(target)!;
  const file = m[1];
  const className = m[2];
  if (!fs.existsSync(file)) throw new UsageError(`no such file: ${file}`);
  const engine = await newEngine();
  const root = process.cwd();
  // the file's project: its folder and the folders above it up to the current one, so imports resolve
  const projectDir = path.dirname(path.resolve(file));
  const inCwd = !path.relative(root, projectDir).startsWith('..');
  loadTree(engine, root, [inCwd ? root : projectDir]);
  const rel = path.relative(root, path.resolve(file)).split(path.sep).join('/');
  if (!engine.ws.get(rel)) engine.setFile(rel, fs.readFileSync(file, 'utf8'));
  const views = new Views(engine.ws);
  const graphs = views.models.graphsIn(rel).filter((g) => !className || g.className === className);
  if (className && !graphs.length) throw new UsageError(`no nn.Module class ${className} in ${file}`);
  const models = graphs.map((g) => ({
    class: g.className,
    path: displayPath(root, g.path),
    line: g.classSpan.line + 1,
    layers: g.layers.map((l) => ({
      name: l.name,
      type: l.type.includes('::') ? l.type.slice(l.type.indexOf('::') + 2) : l.type,
      line: l.site ? l.site.call.span.line + 1 : null,
      ...(l.site && l.site.path !== g.path ? { path: displayPath(root, l.site.path) } : {}),
      args: Object.fromEntries([...l.inst.args].map(([k, v]) => [k, show(v)])),
      ...(l.input?.ch !== undefined ? { inChannels: l.input.ch } : {}),
    })),
    flow: g.flow.map(([a, b]) => [a.name, b.name]),
    traced: g.traced,
  }));
  if (format === 'json') {
    io.out(`${JSON.stringify({ models }, null, 2)}\n`);
    return 0;
  }
  const out: string[] = [];
  for (const g of models) {
    out.push(`${g.class}  (${g.path}:${g.line})${g.traced ? '' : '  [forward not traced]'}`);
    const feeds = new Map<string, string[]>();
    for (const [a, b] of g.flow) feeds.set(a, [...(feeds.get(a) ?? []), b]);
    for (const l of g.layers) {
      const key = Object.entries(l.args).filter(([k]) => !['device', 'dtype', 'padding_mode', 'eps', 'track_running_stats', 'dilation', 'groups', 'inplace'].includes(k)).map(([k, v]) => `${k}=${JSON.stringify(v)}`).join(', ');
      const to = feeds.get(l.name);
      out.push(`  ${l.name.padEnd(28)} ${l.type.replace(/^torch\.nn\./, 'nn.').padEnd(18)} ${key}${to ? `  → ${to.join(', ')}` : ''}`);
    }
    out.push('');
  }
  io.out(`${out.join('\n')}\n`);
  return 0;
}

function rules(io: Io): number {
  const rows = RULES.map((r) => [r.meta.id, r.meta.level, r.meta.family, r.meta.fix]);
  const w = [0, 1, 2].map((i) => Math.max(...rows.map((r) => r[i].length), 4));
  io.out(`${['rule'.padEnd(w[0]), 'level'.padEnd(w[1]), 'family'.padEnd(w[2]), 'fix'].join('  ')}\n`);
  for (const r of rows) io.out(`${r[0].padEnd(w[0])}  ${r[1].padEnd(w[1])}  ${r[2].padEnd(w[2])}  ${r[3]}\n`);
  return 0;
}

function explain(args: string[], io: Io): number {
  const id = args[0];
  if (!id) throw new UsageError('explain needs a rule id');
  const rule = ruleById(id);
  if (!rule) throw new UsageError(`unknown rule '${id}'; see \`regwise rules\``);
  const doc = readDoc(id);
  io.out(doc ?? `${rule.meta.id}: ${rule.meta.title}\n\n${rule.meta.summary}\n`);
  return 0;
}

/** The rule's documentation page, shipped beside the bundle (dist/rules) or read from the source tree. */
export function readDoc(id: string): string | undefined {
  for (const dir of [path.join(__dirname, 'rules'), path.join(__dirname, '..', 'rules'), path.join(__dirname, '..', '..', '..', 'rules')]) {
    const p = path.join(dir, `${id}.md`);
    if (fs.existsSync(p)) return fs.readFileSync(p, 'utf8');
  }
  return undefined;
}

if (require.main === module) {
  main(process.argv.slice(2)).then((code) => {
    process.exitCode = code;
  });
}
