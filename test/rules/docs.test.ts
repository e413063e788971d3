// Every registered rule has its page with the fixed headings, and the page's examples behave as documented.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { describe, expect, test } from 'vitest';
import { RULES } from '../../rules/index';
import { engineFor } from '../helpers/rule-tester';

const HEADINGS = ['What it finds', 'Why it matters', 'When it stays quiet', 'How to fix', 'Sources', 'Incorrect', 'Correct'];
const ROOT = path.resolve(__dirname, '..', '..');

/** The `## ` sections of a page, in order, with their bodies. */
function sections(md: string): { heading: string; body: string }[] {
  const out: { heading: string; body: string }[] = [];
  let fence = false;
  for (const line of md.split('\n')) {
    if (line.startsWith('```')) fence = !fence;
    if (!fence && line.startsWith('## ')) out.push({ heading: line.slice(3).trim(), body: '' });
    else if (out.length) out[out.length - 1].body += `${line}\n`;
  }
  return out;
}

/** The ```python blocks of a section body. */
function pythonBlocks(body: string): string[] {
  const blocks: string[] = [];
  const re = /^```([^\n]*)\n([\s\S]*?)^```\s*$/gm;
  for (let m = re.exec(body); m; m = re.exec(body)) {
    if (m[1].trim() !== 'python') throw new Error(`code block tagged '${m[1].trim()}', expected python`);
    blocks.push(m[2]);
  }
  return blocks;
}

describe.each(RULES.map((r) => [r.meta.id, r] as const))('rules/%s.md', (id, rule) => {
  const file = path.join(ROOT, 'rules', `${id}.md`);

  test('exists with the fixed headings, in order', () => {
    expect(fs.existsSync(file), `${file} is missing`).toBe(true);
    expect(sections(fs.readFileSync(file, 'utf8')).map((s) => s.heading)).toEqual(HEADINGS);
  });

  test('Incorrect example is flagged, Correct example is quiet', async () => {
    const secs = sections(fs.readFileSync(file, 'utf8'));
    const incorrect = pythonBlocks(secs.find((s) => s.heading === 'Incorrect')?.body ?? '');
    const correct = pythonBlocks(secs.find((s) => s.heading === 'Correct')?.body ?? '');
    expect(incorrect.length, 'one python block under Incorrect').toBe(1);
    expect(correct.length, 'one python block under Correct').toBe(1);
    const bad = (await engineFor(rule, { 'main.py': incorrect[0] })).analyze();
    expect(bad.filter((f) => f.rule === 'internal-error').map((f) => f.message)).toEqual([]);
    expect(bad.filter((f) => f.rule === id).length, `Incorrect example of ${id} gives no ${id} finding`).toBeGreaterThanOrEqual(1);
    const good = (await engineFor(rule, { 'main.py': correct[0] })).analyze();
    expect(good.filter((f) => f.rule === id || f.rule === 'internal-error').map((f) => `${f.span.line + 1}: ${f.message}`), `Correct example of ${id}`).toEqual([]);
  });
});
