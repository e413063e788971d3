// Table test for norm-fit-before-split: quiet idioms (Pipeline, fit after the split, exploratory fits), leaks with exact ranges.
import { expect, test } from 'vitest';
import rule from '../../rules/norm-fit-before-split';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const SK = 'import numpy as np\nfrom sklearn.model_selection import KFold, cross_val_score, train_test_split\nfrom sklearn.pipeline import make_pipeline\nfrom sklearn.preprocessing import MinMaxScaler, Normalizer, StandardScaler\nfrom sklearn.impute import SimpleImputer\nfrom sklearn.linear_model import LogisticRegression\n';

test('norm-fit-before-split', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'scaler inside a Pipeline, split and cross-validated',
        code: `${SK}def score(X, y):\n    pipe = make_pipeline(StandardScaler(), LogisticRegression())\n    X_train, X_test, y_train, y_test = train_test_split(X, y, random_state=0)\n    pipe.fit(X_train, y_train)\n    return pipe.score(X_test, y_test), cross_val_score(pipe, X, y, cv=5).mean()\n`,
      },
      {
        name: 'a helper that scales what it is given, called on the training part only',
        code: {
          'prep.py': 'from sklearn.preprocessing import StandardScaler\n\ndef standardise(X):\n    return StandardScaler().fit_transform(X)\n',
          'main.py': 'from sklearn.model_selection import train_test_split\nfrom prep import standardise\n\ndef run(X, y):\n    X_tr, X_te, y_tr, y_te = train_test_split(X, y)\n    return standardise(X_tr), y_tr\n',
        },
      },
      {
        name: 'split first, then fit on the training part and transform the test part',
        code: `${SK}X = np.loadtxt("hives.csv", delimiter=",")\ny = X[:, -1]\nX_train, X_test, y_train, y_test = train_test_split(X[:, :-1], y, test_size=0.25)\nscaler = StandardScaler().fit(X_train)\nX_train = scaler.transform(X_train)\nX_test = scaler.transform(X_test)\n`,
      },
      {
        name: 'split first, then hand-written statistics of the training part',
        code: `${SK}def prepare(X, y):\n    X_tr, X_te, y_tr, y_te = train_test_split(X, y)\n    mu = X_tr.mean(axis=0)\n    sd = X_tr.std(axis=0)\n    return (X_tr - mu) / sd, (X_te - mu) / sd\n`,
      },
      {
        name: 'exploratory fit on data that is never split',
        code: `${SK}X = np.loadtxt("hives.csv", delimiter=",")\nX_scaled = StandardScaler().fit_transform(X)\nprint(X_scaled.mean(axis=0), X_scaled.std(axis=0))\n`,
      },
      {
        name: 'Normalizer learns nothing from other rows',
        code: `${SK}def prepare(X, y):\n    X = Normalizer().fit_transform(X)\n    return train_test_split(X, y)\n`,
      },
      {
        name: 'per-row centring (axis=1) before the split',
        code: `${SK}def prepare(X, y):\n    X = X - X.mean(axis=1, keepdims=True)\n    return train_test_split(X, y)\n`,
      },
      {
        name: 'fitted on a separate reference set, then other data is split',
        code: `${SK}def prepare(X_ref, X_pool, y):\n    scaler = StandardScaler().fit(X_ref)\n    X = scaler.transform(X_pool)\n    return train_test_split(X, y)\n`,
      },
      {
        name: 'one slice alone is a peek, not a split',
        code: `${SK}def peek(log):\n    log = (log - log.mean(axis=0)) / log.std(axis=0)\n    return log[:5]\n`,
      },
    ],
    invalid: [
      {
        name: 'chained StandardScaler().fit(X), transform, then train_test_split',
        code: `${SK}X = np.loadtxt("hives.csv", delimiter=",")\ny = X[:, -1]\nscaler = StandardScaler().fit(X)\n#        ^^^^^^^^^^^^^^^^^^^^^^^ norm-fit-before-split:split\nX_all = scaler.transform(X)\nX_train, X_test, y_train, y_test = train_test_split(X_all, y, test_size=0.2)\n`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('`StandardScaler().fit(X)` (main.py:9) fits StandardScaler on all rows of `X`') || !m.includes('`train_test_split(...)` (main.py:11)') || !m.includes('held-out score overstates')) throw new Error(m);
          expect(found[0].related.map((r) => r.span.line)).toEqual([10]);
        },
      },
      {
        name: 'fit on all rows, split, then transform of the held-out part',
        code: `${SK}def prepare(X, y):\n    scaler = MinMaxScaler()\n    scaler.fit(X)\n#   ^^^^^^^^^^^^^ norm-fit-before-split:split\n    X_tr, X_te, y_tr, y_te = train_test_split(X, y)\n    return scaler.transform(X_tr), scaler.transform(X_te)\n`,
      },
      {
        name: 'imputer fitted on all rows before the split',
        code: `${SK}def prepare(X, y):\n    X = SimpleImputer(strategy="median").fit_transform(X)\n#       ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-fit-before-split:split\n    return train_test_split(X, y, stratify=y)\n`,
      },
      {
        name: 'np.mean / np.std over rows, then slicing into training and validation parts',
        code: `${SK}def windows(log, n_train):\n    mu = np.mean(log, axis=0)\n#        ^^^^^^^^^^^^^^^^^^^^ norm-fit-before-split:stats\n    sd = np.std(log, axis=0)\n    log = (log - mu) / sd\n    return log[:n_train], log[n_train:]\n`,
      },
      {
        name: 'torch.mean over dim 0 of a tensor that random rows are then indexed from',
        code: `import torch\nfrom sklearn.model_selection import train_test_split\ndef prepare(x, n):\n    x = (x - torch.mean(x, dim=0)) / torch.std(x, dim=0)\n#            ^^^^^^^^^^^^^^^^^^^^ norm-fit-before-split:stats\n    train_idx, val_idx = train_test_split(torch.arange(n).numpy(), test_size=0.1)\n    return x[train_idx], x[val_idx]\n`,
      },
      {
        name: 'scaled features cross-validated in a KFold loop',
        code: `${SK}def folds(X, y):\n    X = StandardScaler().fit_transform(X)\n#       ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-fit-before-split:cv\n    scores = []\n    for tr, te in KFold(n_splits=5).split(X):\n        clf = LogisticRegression().fit(X[tr], y[tr])\n        scores.append(clf.score(X[te], y[te]))\n    return scores\n`,
        verify(found) {
          if (!found[0].message.includes('`KFold.split(...)` (main.py:10) then cross-validates')) throw new Error(found[0].message);
        },
      },
      {
        name: 'a helper in another file scales its argument; the caller splits the result',
        code: {
          'prep.py': 'from sklearn.preprocessing import StandardScaler\n\ndef standardise(X):\n    return StandardScaler().fit_transform(X)\n#          ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-fit-before-split:split\n',
          'main.py': 'from sklearn.model_selection import train_test_split\nfrom prep import standardise\n\ndef run(X, y):\n    X = standardise(X)\n    return train_test_split(X, y, test_size=0.2)\n',
        },
        verify(found) {
          if (found[0].path !== 'prep.py' || !found[0].message.includes('(prep.py:4) fits StandardScaler on all rows of `X`, and `train_test_split(...)` (main.py:6)')) throw new Error(found[0].message);
        },
      },
      {
        name: 'the one-call form sklearn.preprocessing.scale before the split',
        code: `from sklearn import preprocessing\nfrom sklearn.model_selection import train_test_split\ndef prepare(X, y):\n    Xs = preprocessing.scale(X)\n#        ^^^^^^^^^^^^^^^^^^^^^^ norm-fit-before-split:split\n    return train_test_split(Xs, y)\n`,
        verify(found) {
          if (!found[0].message.includes('fits StandardScaler on all rows of `X`')) throw new Error(found[0].message);
        },
      },
      {
        name: 'fit on all rows outside a KFold loop, transform inside it',
        code: `${SK}def folds(X, y):\n    scaler = StandardScaler().fit(X)\n#            ^^^^^^^^^^^^^^^^^^^^^^^ norm-fit-before-split:cv\n    for tr, te in KFold(n_splits=5, shuffle=True).split(X):\n        clf = LogisticRegression().fit(scaler.transform(X[tr]), y[tr])\n        print(clf.score(scaler.transform(X[te]), y[te]))\n`,
      },
    ],
  });
});
