// The `regwise` command line: scan, model, rules, explain. Reports go to stdout (or --output), logs to stderr.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { loadPythonParser } from '../engine/parser';
import { Engine } from '../engine/engine';
import { Views } from '../engine/views';
import { show } from '../engine/values';
import { toCell } from '../engine/source';
import type { Finding } from '../engine/types';
import { RULES, ruleById } from '../../../rules/index';
import { loadTree } from './load';
import { VERSION } from './version';

export class UsageError extends Error {}

interface Io {
  out: (s: string) => void;
  err: (s: string) => void;
}

const HELP = `regwise ${VERSION}: static checks for regularization and normalization mistakes in deep-learning code

usage:
  regwise scan [PATH...] [--format text|json|sarif] [--output FILE] [--fail-level error|warning|info|never]
  regwise model FILE[:CLASS] [--format text|json]
  regwise rules
  regwise explain RULE
`;

export async function main(argv: string[], io: Io = { out: (s) => process.stdout.write(s), err: (s) => process.stderr.write(s) }): Promise<number> {
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
    if (a.startsWith('--')) {
      const [name, inline] = a.slice(2).split(/=(.*)/s, 2);
      if (valued.includes(name)) {
        const v = inline ?? args[++i];
        if (v === undefined) throw new UsageError(`--${name} needs a value`);
        f.values.set(name, v);
      } else if (switches.includes(name)) f.switches.add(name);
      else throw new UsageError(`unknown option --${name}`);
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

/** Paths in reports are as given on the command line: relative to the current folder. */
function displayPath(root: string, rel: string): string {
  return path.relative(process.cwd(), path.join(root, rel)).split(path.sep).join('/') || rel;
}

async function scan(args: string[], io: Io): Promise<number> {
  const flags = parseFlags(args, ['format', 'output', 'fail-level'], []);
  const format = choice(flags.values.get('format'), ['text', 'json'], 'format', 'text');
  const failLevel = choice(flags.values.get('fail-level'), ['error', 'warning', 'info', 'never'], 'fail-level', 'warning');
  const roots = flags.positional.length ? flags.positional : ['.'];
  for (const r of roots) if (!fs.existsSync(r)) throw new UsageError(`no such file or folder: ${r}`);
  const engine = await newEngine();
  const root = process.cwd();
  const tree = loadTree(engine, root, roots);
  const findings = engine.analyze(tree.sources);
  for (const s of tree.skipped) io.err(`regwise: skipped ${s.path}: ${s.reason}\n`);
  const report = format === 'json' ? jsonReport(engine, root, findings) : textReport(engine, root, findings);
  const outFile = flags.values.get('output');
  if (outFile) fs.writeFileSync(outFile, report);
  else io.out(report);
  const rank = { error: 3, warning: 2, info: 1, hint: 0, never: 99 } as const;
  const threshold = rank[failLevel as keyof typeof rank];
  return findings.some((f) => rank[f.level] >= threshold) ? 1 : 0;
}

export function findingJson(engine: Engine, root: string, f: Finding) {
  const file = engine.ws.get(f.path)?.source;
  const cell = file ? toCell(file, f.span.line, f.span.col) : undefined;
  const endCell = file ? toCell(file, f.span.endLine, f.span.endCol) : undefined;
  return {
    rule: f.rule,
    level: f.level,
    path: displayPath(root, f.path),
    line: (cell ? cell.line : f.span.line) + 1,
    column: f.span.col + 1,
    endLine: (endCell ? endCell.line : f.span.endLine) + 1,
    endColumn: f.span.endCol + 1,
    ...(cell ? { cell: cell.cell + 1 } : {}),
    message: f.message,
    fixes: f.fixes.map((x) => ({ title: x.title, kind: x.kind, edits: x.edits.map((e) => ({ path: displayPath(root, e.path), start: e.start, end: e.end, newText: e.newText })) })),
  };
}

function jsonReport(engine: Engine, root: string, findings: Finding[]): string {
  return `${JSON.stringify({ findings: findings.map((f) => findingJson(engine, root, f)) }, null, 2)}\n`;
}

function textReport(engine: Engine, root: string, findings: Finding[]): string {
  const lines = findings.map((f) => {
    const j = findingJson(engine, root, f);
    const where = j.cell ? `${j.path}:cell ${j.cell}:${j.line}:${j.column}` : `${j.path}:${j.line}:${j.column}`;
    return `${where} ${f.level} ${f.rule} ${f.message}`;
  });
  lines.push(`${findings.length} finding${findings.length === 1 ? '' : 's'}`);
  return `${lines.join('\n')}\n`;
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
