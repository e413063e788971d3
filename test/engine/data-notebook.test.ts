// The data view on a notebook: code cells in order are one program, and findings map back to their cell and line.
import { expect, test } from 'vitest';
import { Engine } from '../../server/src/engine/engine';
import { toCell } from '../../server/src/engine/source';
import augment from '../../rules/augment-on-eval-data';
import evalMismatch from '../../rules/eval-transform-mismatch';
import fitBeforeSplit from '../../rules/norm-fit-before-split';
import refit from '../../rules/norm-refit-on-holdout';
import scaledCv from '../../rules/scaled-before-cv';
import type { Rule } from '../../server/src/engine/rule';
import { parser } from '../helpers/rule-tester';

const RULES = [fitBeforeSplit, refit, scaledCv, evalMismatch, augment] as unknown as Rule[];

function notebook(cells: [kind: 'markdown' | 'code', text: string][]): string {
  return JSON.stringify({
    nbformat: 4,
    nbformat_minor: 5,
    metadata: {},
    cells: cells.map(([kind, text]) => ({
      cell_type: kind,
      metadata: {},
      source: text.split(/(?<=\n)/),
      ...(kind === 'code' ? { outputs: [], execution_count: null } : {}),
    })),
  });
}

const NB = notebook([
  ['markdown', '# Colony screening\n'],
  ['code', '%matplotlib inline\nimport numpy as np\nfrom sklearn.model_selection import cross_val_score, train_test_split\nfrom sklearn.preprocessing import StandardScaler\nfrom sklearn.svm import SVC\nfrom torchvision import datasets, transforms'],
  ['code', 'X = np.loadtxt("inspections.csv", delimiter=",")\ny = X[:, -1]\nX = X[:, :-1]\n'],
  ['markdown', 'Scale, then split.'],
  ['code', 'scaler = StandardScaler()\nX_s = scaler.fit_transform(X)\n'],
  ['code', '!ls data\nX_tr, X_te, y_tr, y_te = train_test_split(X_s, y, random_state=0)\nX_te = StandardScaler().fit_transform(X_te)\n'],
  ['code', 'cross_val_score(SVC(), X_s, y, cv=5).mean()'],
  ['markdown', '## Crops'],
  ['code', 'train_tf = transforms.Compose([transforms.RandomCrop(64), transforms.ToTensor(), transforms.Normalize((0.5,), (0.25,))])\nval_tf = transforms.Compose([\n    transforms.RandomHorizontalFlip(),\n    transforms.ToTensor(),\n])\ntrain_set = datasets.ImageFolder("crops/train", transform=train_tf)\nval_set = datasets.ImageFolder("crops/val", transform=val_tf)\n'],
]);

test('data-pipeline findings in a notebook map to their cell (1-based among all cells) and line', async () => {
  const e = new Engine(await parser(), RULES);
  const src = e.setFile('notebooks/screen.ipynb', NB);
  // markdown cells take no lines of the program; magics are masked, not dropped
  expect(src.cells?.map((c) => c.index)).toEqual([1, 2, 4, 5, 6, 8]);
  const found = e.analyze().map((f) => {
    const c = toCell(src, f.span.line, f.span.col)!;
    return `cell ${c.cell + 1}:line ${c.line + 1}:col ${c.col + 1} ${f.rule}:${f.messageId}`;
  });
  expect(found).toEqual([
    'cell 5:line 2:col 7 norm-fit-before-split:split',
    'cell 5:line 2:col 7 scaled-before-cv:prescaled',
    'cell 6:line 3:col 8 norm-refit-on-holdout:refit',
    'cell 9:line 2:col 10 eval-transform-mismatch:missing',
    'cell 9:line 3:col 5 augment-on-eval-data:random',
  ]);
  const messages = e.analyze().map((f) => f.message);
  // messages name places as cell and line too, never as lines of the joined program
  expect(messages[0]).toContain('`scaler.fit_transform(X)` (screen.ipynb cell 5, line 2)');
  expect(messages[0]).toContain('`train_test_split(...)` (screen.ipynb cell 6, line 2)');
  // the later cross-validation of the same scaled rows is a related place of the same finding
  expect(e.analyze()[0].related.map((r) => toCell(src, r.span.line, r.span.col)?.cell)).toEqual([5, 6]);
  expect(messages.find((m) => m.includes('held-out part'))).toContain('the held-out part of `train_test_split(...)` (screen.ipynb cell 6, line 2)');
  expect(messages.find((m) => m.includes('has no Normalize'))).toContain('(screen.ipynb cell 9, line 1)');
});

test('a notebook cell that only explores the scaled data stays quiet', async () => {
  const e = new Engine(await parser(), RULES);
  e.setFile('explore.ipynb', notebook([
    ['code', 'import numpy as np\nfrom sklearn.preprocessing import StandardScaler\nX = np.random.default_rng(0).normal(size=(50, 3))'],
    ['code', 'Z = StandardScaler().fit_transform(X)\nZ.mean(axis=0), Z.std(axis=0)'],
  ]));
  expect(e.analyze()).toEqual([]);
});
