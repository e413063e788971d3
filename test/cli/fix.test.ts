// `--fix` on disk: atomic writes, line endings, BOM, file mode, notebook JSON layout, changed-on-disk refusal, idempotence.
import { afterAll, beforeAll, describe, expect, test } from 'vitest';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { buildCli, cleanBuild, parseReport, regwise, tempDir, where, writeTree, biasModel } from './helpers';
import { NOTEBOOK_CELLS, notebook } from './fixtures';
import { main } from '../../server/src/cli/main';
import { collect, walk } from '../../server/src/cli/load';
import { applyFixesToFiles, detectEol, writeAtomic } from '../../server/src/cli/fixer';
import { Engine } from '../../server/src/engine/engine';
import { loadPythonParser } from '../../server/src/engine/parser';
import { RULES } from '../../rules/index';
import { defineRule, type Rule } from '../../server/src/engine/rule';

beforeAll(async () => {
  await buildCli();
});
afterAll(() => cleanBuild());

const FIXED_CONV = 'self.conv = nn.Conv2d(3, 8, 3, bias=False)';

/** Runs main() in `dir` with extra rules registered for the call. */
async function runIn(dir: string, args: string[], extra: Rule[] = []): Promise<{ code: number; out: string; err: string }> {
  const list = RULES as Rule[];
  list.push(...extra);
  const cwd = process.cwd();
  let out = '';
  let err = '';
  try {
    process.chdir(dir);
    const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s), env: {} });
    return { code, out, err };
  } finally {
    process.chdir(cwd);
    for (const r of extra) list.splice(list.indexOf(r), 1);
  }
}

/** A test rule whose fix inserts two lines at the top of a file that lacks `checked = True` (kind as given). */
function headerRule(kind: 'safe' | 'suggested'): Rule {
  return defineRule({
    meta: { id: `needs-header-${kind}`, title: 't', family: 'model', level: 'warning', frameworks: ['pytorch'], summary: 's', fix: kind, sources: [], messages: { m: 'no header' } },
    check(ctx) {
      if (ctx.path.endsWith('.ipynb') || ctx.textOf(ctx.path).includes('checked = True')) return;
      const span = { start: 0, end: 0, line: 0, col: 0, endLine: 0, endCol: 0 };
      ctx.report({ messageId: 'm', data: {}, path: ctx.path, span, fixes: [{ title: 'Add the header', kind, edits: [ctx.edit(ctx.path, 0, 0, 'checked = True\nalso = 1\n')] }] });
    },
  }) as unknown as Rule;
}

function tempFiles(dir: string): string[] {
  return fs.readdirSync(dir).filter((f) => f.includes('.regwise-') && f.endsWith('.tmp'));
}

describe('--fix on Python files', () => {
  test('applies the safe fix, prints what changed, replaces the file atomically, and a second run applies nothing', () => {
    const dir = tempDir();
    writeTree(dir, { 'net.py': biasModel() });
    const file = path.join(dir, 'net.py');
    const inoBefore = fs.statSync(file).ino;
    const r = regwise(['scan', '--fix', '--format', 'json'], dir);
    expect(r.stderr).toContain('regwise: fixed net.py:7 bias-before-norm: Pass bias=False to `conv`');
    expect(r.stderr).toContain('regwise: 1 fix applied in 1 file');
    expect(fs.readFileSync(file, 'utf8')).toBe(biasModel().replace('self.conv = nn.Conv2d(3, 8, 3)', FIXED_CONV));
    // written by rename: a new inode, and no temporary file left beside it
    expect(fs.statSync(file).ino).not.toBe(inoBefore);
    expect(tempFiles(dir)).toEqual([]);
    // the report shows what remains after fixing, so the job passes
    expect(parseReport(r.stdout).findings).toEqual([]);
    expect(r.code).toBe(0);
    const again = regwise(['scan', '--fix'], dir);
    expect(again.stderr).toContain('regwise: 0 fixes applied in 0 files');
    expect(fs.readFileSync(file, 'utf8')).toBe(biasModel().replace('self.conv = nn.Conv2d(3, 8, 3)', FIXED_CONV));
  });

  test('keeps CRLF line endings (also in inserted lines), a BOM and the file mode', async () => {
    const dir = tempDir();
    const crlf = biasModel().replace(/\n/g, '\r\n');
    const file = path.join(dir, 'net.py');
    fs.writeFileSync(file, `\ufeff${crlf}`);
    fs.chmodSync(file, 0o750);
    const r = await runIn(dir, ['scan', '--fix', '--jobs', '1', '--format', 'json'], [headerRule('safe')]);
    expect(r.err).toContain('2 fixes applied in 1 file');
    const after = fs.readFileSync(file, 'utf8');
    expect(after).toBe(`\ufeffchecked = True\r\nalso = 1\r\n${crlf.replace('self.conv = nn.Conv2d(3, 8, 3)', FIXED_CONV)}`);
    expect(after.replace(/\r\n/g, '')).not.toContain('\n');
    expect(fs.statSync(file).mode & 0o777).toBe(0o750);
    expect(detectEol(after)).toBe('\r\n');
    const again = await runIn(dir, ['scan', '--fix', '--jobs', '1'], [headerRule('safe')]);
    expect(again.err).toContain('0 fixes applied');
    expect(fs.readFileSync(file, 'utf8')).toBe(after);
  });

  test('--fix leaves suggested fixes alone; --fix-suggested applies them', async () => {
    const dir = tempDir();
    writeTree(dir, { 'a.py': 'x = 1\n' });
    const file = path.join(dir, 'a.py');
    const safeOnly = await runIn(dir, ['scan', '--fix', '--jobs', '1', '--format', 'json'], [headerRule('suggested')]);
    expect(safeOnly.err).toContain('0 fixes applied');
    expect(fs.readFileSync(file, 'utf8')).toBe('x = 1\n');
    expect(where(parseReport(safeOnly.out).findings)).toEqual(['a.py:1 needs-header-suggested']);
    const both = await runIn(dir, ['scan', '--fix-suggested', '--jobs', '1', '--format', 'json'], [headerRule('suggested')]);
    expect(both.err).toContain('regwise: fixed a.py:1 needs-header-suggested: Add the header');
    expect(fs.readFileSync(file, 'utf8')).toBe('checked = True\nalso = 1\nx = 1\n');
    expect(parseReport(both.out).findings).toEqual([]);
  });

  test('a file changed on disk after it was read is not written', async () => {
    const dir = tempDir();
    writeTree(dir, { 'net.py': biasModel() });
    const file = path.join(dir, 'net.py');
    const engine = new Engine(await loadPythonParser(), RULES);
    const c = collect(dir, walk([dir]));
    for (const s of c.sources) engine.setFile(s.rel, s.raw);
    const findings = engine.analyze();
    const edited = `${biasModel()}# edited by someone else\n`;
    fs.writeFileSync(file, edited);
    const outcome = applyFixesToFiles(engine, c.sources, findings, 'safe');
    expect(outcome.changed).toEqual([]);
    expect(outcome.refused).toEqual([{ path: 'net.py', reason: 'changed on disk since it was read; not written' }]);
    expect(fs.readFileSync(file, 'utf8')).toBe(edited);
    // the engine keeps the text it analysed, not a half-fixed one
    expect(engine.ws.get('net.py')!.source.text).toBe(biasModel());
  });

  test('a failed write leaves the target as it was and no temporary file', () => {
    const dir = tempDir();
    const target = path.join(dir, 'target.py');
    fs.mkdirSync(target); // renaming a file over a folder fails
    fs.writeFileSync(path.join(target, 'inside.py'), 'x = 1\n');
    expect(() => writeAtomic(target, 'new\n', 0o644)).toThrow();
    expect(fs.readFileSync(path.join(target, 'inside.py'), 'utf8')).toBe('x = 1\n');
    expect(tempFiles(dir)).toEqual([]);
  });
});

describe('--fix on notebooks', () => {
  const fixedCells = NOTEBOOK_CELLS.map((c, i) => (i === 2 ? { ...c, source: c.source.replace('self.conv = nn.Conv2d(3, 8, 3)', FIXED_CONV) } : c));

  test('edits only the affected cell and keeps the JSON layout byte for byte (nbformat style: indent 1, line lists)', () => {
    const dir = tempDir();
    const nbPath = path.join(dir, 'explore.ipynb');
    fs.writeFileSync(nbPath, notebook(NOTEBOOK_CELLS));
    const r = regwise(['scan', '--fix'], dir);
    expect(r.stderr).toContain('regwise: fixed explore.ipynb:cell 3:4 bias-before-norm: Pass bias=False to `conv`');
    const after = fs.readFileSync(nbPath, 'utf8');
    expect(after).toBe(notebook(fixedCells));
    expect(after).toContain('%matplotlib inline');
    expect(after).toContain('“é” and ünïcode');
    expect(regwise(['scan', '--fix'], dir).stderr).toContain('0 fixes applied');
    expect(fs.readFileSync(nbPath, 'utf8')).toBe(after);
  });

  test('other layouts stay too: two-space indent, CRLF between tokens, a source kept as one string', () => {
    const dir = tempDir();
    const nbPath = path.join(dir, 'nb.ipynb');
    const asString = (cells: typeof NOTEBOOK_CELLS) => {
      const doc = JSON.parse(notebook(cells));
      doc.cells[2].source = cells[2].source;
      return `${JSON.stringify(doc, null, 2).replace(/\n/g, '\r\n')}\r\n`;
    };
    fs.writeFileSync(nbPath, asString(NOTEBOOK_CELLS));
    regwise(['scan', '--fix'], dir);
    expect(fs.readFileSync(nbPath, 'utf8')).toBe(asString(fixedCells));
  });
});
