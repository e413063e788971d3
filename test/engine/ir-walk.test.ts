// walkExpr visits exactly what a recursive walk over exprChildren visits, in the same order (over every sample file).
import { expect, test } from 'vitest';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { exprChildren, stmtExprs, walkExpr, walkStmts, type Expr } from '../../server/src/engine/ir';
import { extractFacts } from '../../server/src/engine/facts';
import { parser } from '../helpers/rule-tester';

const root = path.resolve(__dirname, '../..');
const files = (dir: string): string[] =>
  fs.readdirSync(dir, { withFileTypes: true }).flatMap((e) => (e.isDirectory() ? files(path.join(dir, e.name)) : e.name.endsWith('.py') ? [path.join(dir, e.name)] : []));

function recursive(e: Expr, out: Expr[]): void {
  out.push(e);
  for (const c of exprChildren(e)) recursive(c, out);
}

test('walkExpr order equals the recursive exprChildren order on the samples', async () => {
  const p = await parser();
  let compared = 0;
  const kinds = new Set<string>();
  // every expression kind with children, nested in one another, beside the samples
  const synthetic = 'y = [a.b(c, *d, k=-e, **f) for g, h in {1: 2, **i}.items() if (j := {k, l[1:2:3]}) and not m < n <= o]\nz = (lambda q: q[::2] + p if r else s)(t)\n';
  for (const text of [...files(path.join(root, 'samples')).map((f) => fs.readFileSync(f, 'utf8')), synthetic]) {
    const ir = extractFacts(p, text).ir;
    walkStmts(ir.body, (s) => {
      for (const e of stmtExprs(s)) {
        const want: Expr[] = [];
        recursive(e, want);
        const got: Expr[] = [];
        walkExpr(e, (x) => void got.push(x));
        expect(got).toEqual(want);
        for (let i = 0; i < got.length; i++) expect(got[i]).toBe(want[i]);
        compared += got.length;
        for (const x of got) kinds.add(x.k);
      }
    });
  }
  expect(compared).toBeGreaterThan(3000);
  for (const k of ['attr', 'call', 'list', 'tuple', 'set', 'dict', 'bin', 'boolop', 'unary', 'cmp', 'sub', 'slice', 'star', 'comp', 'cond', 'lambda', 'walrus']) {
    expect(kinds.has(k), k).toBe(true);
  }
});

test('returning false skips the children of that expression only', async () => {
  const p = await parser();
  const ir = extractFacts(p, 'f(g(1, 2), [3, {4: 5}], x=h(6), *a, **k)\n').ir;
  const s = ir.body[0];
  const seen: string[] = [];
  walkExpr(stmtExprs(s)[0], (e) => {
    seen.push(e.k === 'num' ? String(e.value) : e.k === 'name' ? e.id : e.k);
    return !(e.k === 'call' && e.fn.k === 'name' && e.fn.id === 'g');
  });
  expect(seen).toEqual(['call', 'f', 'call', 'list', '3', 'dict', '4', '5', 'star', 'a', 'call', 'h', '6', 'k']);
});
