// The data view's facts: splits, fits and roles by position, argument and name, followed through names and files.
import { expect, test } from 'vitest';
import { Engine } from '../../server/src/engine/engine';
import { Views } from '../../server/src/engine/views';
import { partFromWords, transformName } from '../../server/src/engine/views/data';
import { RULES } from '../../rules/index';
import { parser } from '../helpers/rule-tester';

async function view(files: Record<string, string>) {
  const e = new Engine(await parser(), []);
  for (const [p, t] of Object.entries(files)) e.setFile(p, t);
  return new Views(e.ws).data;
}

test('library names resolve through imports and helpers in other files, not by spelling', async () => {
  const d = await view({
    'prep.py': 'from sklearn.preprocessing import StandardScaler as Standardise\ndef make_scaler():\n    return Standardise()\n',
    'main.py': 'import sklearn.model_selection as ms\nfrom prep import make_scaler\ndef f(X, y):\n    s = make_scaler()\n    Z = s.fit_transform(X)\n    return ms.train_test_split(Z, y)\n',
  });
  const f = d.forFile('main.py');
  expect(f.fits.map((x) => [x.estimator, x.kind, x.text])).toEqual([['StandardScaler', 'fit_transform', 's.fit_transform(X)']]);
  expect(f.splits.map((x) => [x.kind, x.span.line])).toEqual([['train_test_split', 5]]);
  expect(f.splitLeaks.map((l) => [l.fit.call.span.line, l.split?.span.line])).toEqual([[4, 5]]);
  // a class that is merely called StandardScaler is not scikit-learn's
  const own = await view({ 'main.py': 'class StandardScaler:\n    def fit_transform(self, X):\n        return X\ndef f(X, y):\n    from sklearn.model_selection import train_test_split\n    X = StandardScaler().fit_transform(X)\n    return train_test_split(X, y)\n' });
  expect(own.forFile('main.py').fits).toEqual([]);
});

test('roles: split position, the held-out slice of a slice pair, and names only as a last resort', async () => {
  const d = await view({
    'main.py': [
      'from sklearn.preprocessing import MinMaxScaler',
      'from sklearn.model_selection import train_test_split',
      'def f(X, y, X_test):',
      '    a, b, c, e = train_test_split(X, y)',
      '    MinMaxScaler().fit(b)',
      '    MinMaxScaler().fit(a)',
      '    MinMaxScaler().fit(X[100:])',
      '    MinMaxScaler().fit(X_test)',
      '    head = X[:100]',
      '',
    ].join('\n'),
  });
  const f = d.forFile('main.py');
  expect(f.holdoutFits.map((h) => [h.fit.call.span.line, h.role.by])).toEqual([[4, 'split'], [6, 'split'], [7, 'name']]);
  const slice = f.splits.find((s) => s.kind === 'slice')!;
  expect([slice.label, [...slice.seen].sort()]).toEqual(['slicing [:100] / [100:]', ['holdout', 'train']]);
  // one half alone is no split
  const one = (await view({ 'main.py': 'from sklearn.preprocessing import MinMaxScaler\ndef f(X):\n    MinMaxScaler().fit(X[100:])\n' })).forFile('main.py');
  expect(one.holdoutFits).toEqual([]);
});

test('datasets: role from train=False, a folder argument through a helper, or the name; chains flattened', async () => {
  const d = await view({
    'data.py': 'from torchvision import datasets, transforms\nEVAL = transforms.Compose([transforms.Resize(72), transforms.Compose([transforms.CenterCrop(64), transforms.ToTensor()])])\ndef folder(root, split, tf):\n    return datasets.ImageFolder(f"{root}/{split}", transform=tf)\n',
    'main.py': 'from torchvision import datasets\nfrom data import EVAL, folder\ndef f(root):\n    a = datasets.MNIST(root, train=False, transform=EVAL)\n    b = folder(root, "valid", EVAL)\n    holdout_ds = folder(root, "x", EVAL)\n    return a, b, holdout_ds\n',
  });
  const ds = d.forFile('main.py').datasets;
  expect(ds.map((u) => [u.label, u.role?.part, u.role?.by, u.role?.detail])).toEqual([
    ['a', 'holdout', 'dataset-argument', 'train=False'],
    ['b', 'holdout', 'dataset-argument', '"valid"'],
    ['holdout_ds', 'holdout', 'name', 'the name `holdout_ds`'],
  ]);
  expect(ds[0].transform?.steps.map((s) => s.name)).toEqual(['Resize', 'CenterCrop', 'ToTensor']);
  expect(ds[0].transform?.site?.path).toBe('data.py');
});

test('name words and transform names', () => {
  expect(['X_test', 'valSet', 'data/val', 'X_train', 'trainval', 'X_tr', 'interval', 'test_train', 'X_dev'].map((w) => partFromWords(w)))
    .toEqual(['holdout', 'holdout', 'holdout', 'train', undefined, undefined, undefined, undefined, 'holdout']);
  // in a path, `dev` is the device folder of /dev/shm, not a development split
  expect(partFromWords('dev', true)).toBeUndefined();
  expect(['torchvision.transforms.Normalize', 'torchvision.transforms.v2.RandomCrop', 'torch.nn.Linear'].map(transformName))
    .toEqual(['Normalize', 'RandomCrop', undefined]);
});

test('findings do not depend on which file is analysed first; a recursive helper does not loop', async () => {
  const files: Record<string, string> = {
    'prep.py': 'from sklearn.preprocessing import StandardScaler\ndef scale(X, depth=0):\n    if depth > 3:\n        return scale(X, depth - 1)\n    return StandardScaler().fit_transform(X)\n',
    'a.py': 'from sklearn.model_selection import train_test_split\nfrom prep import scale\ndef run(X, y):\n    return train_test_split(scale(X), y)\n',
    'b.py': 'from sklearn.model_selection import cross_val_score\nfrom sklearn.svm import SVC\nfrom prep import scale\ndef run(X, y):\n    return cross_val_score(SVC(), scale(X), y)\n',
  };
  const run = async (order: string[]) => {
    const e = new Engine(await parser(), RULES.filter((r) => r.meta.family === 'data'));
    for (const p of order) e.setFile(p, files[p]);
    return e.analyze(order).map((f) => `${f.path}:${f.span.line + 1} ${f.rule}:${f.messageId}`).sort();
  };
  const ab = await run(['prep.py', 'a.py', 'b.py']);
  // one helper, two callers: the split in a.py and the cross-validation in b.py
  expect(ab).toEqual(['prep.py:5 norm-fit-before-split:cv', 'prep.py:5 norm-fit-before-split:split', 'prep.py:5 scaled-before-cv:prescaled']);
  expect(await run(['b.py', 'a.py', 'prep.py'])).toEqual(ab);
});
