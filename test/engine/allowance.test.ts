// Allowance comments: `# regwise: allow RULE -- reason` silences that rule on its line (or the next, alone on a line).
import { expect, test } from 'vitest';
import rule from '../../rules/bias-before-norm';
import type { Rule } from '../../server/src/engine/rule';
import { parseAllowances } from '../../server/src/engine/engine';
import { engineFor } from '../helpers/rule-tester';

const model = (conv: string, before = '') => [
  'import torch.nn as nn',
  '# regwise: allow-file nothing-real -- unrelated ids are ignored',
  'class M(nn.Module):',
  '    def __init__(self):',
  '        super().__init__()',
  ...(before ? [`        ${before}`] : []),
  `        self.conv = ${conv}`,
  '        self.bn = nn.BatchNorm2d(8)',
  '        self.conv2 = nn.Conv2d(8, 8, 3)',
  '        self.bn2 = nn.BatchNorm2d(8)',
  '    def forward(self, x):',
  '        return self.bn2(self.conv2(self.bn(self.conv(x))))',
].join('\n');

async function lines(src: string): Promise<number[]> {
  const e = await engineFor(rule as unknown as Rule, { 'main.py': src });
  return e.analyze().map((f) => f.span.line + 1);
}

test('without an allowance both convs are flagged', async () => {
  expect(await lines(model('nn.Conv2d(3, 8, 3)'))).toEqual([6, 8]);
});

test('an allowance on the same line silences only that line', async () => {
  expect(await lines(model('nn.Conv2d(3, 8, 3)  # regwise: allow bias-before-norm -- bias kept for a later export'))).toEqual([8]);
});

test('an allowance alone on a line covers the next line', async () => {
  expect(await lines(model('nn.Conv2d(3, 8, 3)', '# regwise: allow bias-before-norm, drop-rate-range -- legacy checkpoint'))).toEqual([9]);
});

test('an allowance for another rule does not silence this one', async () => {
  expect(await lines(model('nn.Conv2d(3, 8, 3)  # regwise: allow drop-rate-range -- other'))).toEqual([6, 8]);
});

test('allow-file silences the rule everywhere in the file', async () => {
  expect(await lines(`# regwise: allow-file bias-before-norm -- ported weights\n${model('nn.Conv2d(3, 8, 3)')}`)).toEqual([]);
});

test('the comment grammar: rules, reason, own-line placement', () => {
  const a = parseAllowances([
    { line: 4, text: 'regwise: allow a-rule, b-rule -- why not', ownLine: true, span: { start: 0, end: 0, line: 4, col: 0, endLine: 4, endCol: 0 } },
    { line: 7, text: 'regwise: allow c-rule', ownLine: false, span: { start: 0, end: 0, line: 7, col: 9, endLine: 7, endCol: 30 } },
    { line: 9, text: 'regwise allow c-rule', ownLine: false, span: { start: 0, end: 0, line: 9, col: 9, endLine: 9, endCol: 30 } },
  ]);
  expect(a).toEqual([
    { rules: ['a-rule', 'b-rule'], fileWide: false, line: 5, reason: 'why not' },
    { rules: ['c-rule'], fileWide: false, line: 7, reason: undefined },
  ]);
});
