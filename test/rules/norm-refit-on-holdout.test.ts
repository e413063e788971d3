// Table test for norm-refit-on-holdout: fits on held-out rows (by split position or, last, by name); the fix reuses the training fit.
import { test } from 'vitest';
import rule from '../../rules/norm-refit-on-holdout';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const SK = 'from sklearn.model_selection import KFold, train_test_split\nfrom sklearn.pipeline import make_pipeline\nfrom sklearn.preprocessing import Normalizer, RobustScaler, StandardScaler\nfrom sklearn.linear_model import LogisticRegression\n';

const SPLIT_REFIT = (method: string) => `${SK}def holdout(X, y):\n    X_train, X_test, y_train, y_test = train_test_split(X, y, test_size=0.25)\n    scaler = StandardScaler()\n    X_train = scaler.fit_transform(X_train)\n    X_test = scaler.${method}(X_test)\n    return LogisticRegression().fit(X_train, y_train).score(X_test, y_test)\n`;

test('norm-refit-on-holdout', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'a helper that fits only when no scaler is passed (`if scaler is None`), given the training scaler for the test part',
        code: `${SK}def preprocess(X, scaler=None):\n    if scaler is None:\n        scaler = StandardScaler().fit(X)\n    return scaler.transform(X), scaler\ndef holdout(X, y):\n    X_train, X_test, y_train, y_test = train_test_split(X, y)\n    X_train, scaler = preprocess(X_train)\n    X_test, _ = preprocess(X_test, scaler)\n    return X_train, X_test\n`,
      },
      {
        name: 'the same guard written `if not scaler` and `if scaler is not None: ... else: fit`, scaler passed by keyword',
        code: `${SK}def prep_a(X, scaler=None):\n    if not scaler:\n        scaler = StandardScaler().fit(X)\n    return scaler.transform(X)\ndef prep_b(X, scaler=None):\n    if scaler is not None:\n        return scaler.transform(X)\n    else:\n        return StandardScaler().fit_transform(X)\ndef holdout(X, y):\n    X_train, X_test, y_train, y_test = train_test_split(X, y)\n    s = StandardScaler().fit(X_train)\n    return prep_a(X_test, scaler=s), prep_b(X_test, scaler=s)\n`,
      },
      {
        name: 'Pipeline fitted on the training part',
        code: `${SK}def holdout(X, y):\n    X_train, X_test, y_train, y_test = train_test_split(X, y)\n    pipe = make_pipeline(StandardScaler(), LogisticRegression()).fit(X_train, y_train)\n    return pipe.score(X_test, y_test)\n`,
      },
      {
        name: 'fit on the training part, transform of the test part',
        code: SPLIT_REFIT('transform'),
      },
      {
        name: 'split first, then one fit on the training rows',
        code: `${SK}X_tr, X_te, y_tr, y_te = train_test_split(X, y)\nscaler = RobustScaler().fit(X_tr)\nclf = LogisticRegression().fit(scaler.transform(X_tr), y_tr)\n`,
      },
      {
        name: 'never-split exploratory fit',
        code: `${SK}import numpy as np\nX = np.loadtxt("hives.csv", delimiter=",")\nprint(StandardScaler().fit_transform(X).mean(axis=0))\n`,
      },
      {
        name: 'Normalizer on test rows learns nothing from them',
        code: `${SK}def holdout(X, y):\n    X_train, X_test, y_train, y_test = train_test_split(X, y)\n    return Normalizer().fit_transform(X_train), Normalizer().fit_transform(X_test)\n`,
      },
      {
        name: 'a name with no train/test word is not taken as held out',
        code: `${SK}def per_site(X_north, X_south):\n    return StandardScaler().fit_transform(X_north), StandardScaler().fit_transform(X_south)\n`,
      },
    ],
    invalid: [
      {
        name: 'the guarded helper called on the test part without a scaler still fits on it',
        code: `${SK}def preprocess(X, scaler=None):\n    if scaler is None:\n        scaler = StandardScaler().fit(X)\n#                ^^^^^^^^^^^^^^^^^^^^^^^ norm-refit-on-holdout:refit\n    return scaler.transform(X), scaler\ndef holdout(X, y):\n    X_train, X_test, y_train, y_test = train_test_split(X, y)\n    X_test, _ = preprocess(X_test)\n    return X_test\n`,
      },
      {
        name: 'fit_transform on the test part of train_test_split, with the safe fix',
        code: `${SK}def holdout(X, y):\n    X_train, X_test, y_train, y_test = train_test_split(X, y, test_size=0.25)\n    scaler = StandardScaler()\n    X_train = scaler.fit_transform(X_train)\n    X_test = scaler.fit_transform(X_test)\n#            ^^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-refit-on-holdout:refit\n    return LogisticRegression().fit(X_train, y_train).score(X_test, y_test)\n`,
        output: SPLIT_REFIT('transform'),
        verify(found) {
          const m = found[0].message;
          if (!m.includes('fits StandardScaler on `X_test`, the held-out part of `train_test_split(...)` (main.py:6)')) throw new Error(m);
          if (found[0].related[0]?.span.line !== 7) throw new Error('related location should be the training fit');
        },
      },
      {
        name: 'chained fit on the validation part: no scaler to reuse, no fix',
        code: `${SK}def holdout(X, y):\n    X_tr, X_val, y_tr, y_val = train_test_split(X, y)\n    X_tr = StandardScaler().fit_transform(X_tr)\n    X_val = StandardScaler().fit_transform(X_val)\n#           ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-refit-on-holdout:refit\n    return X_tr, X_val\n`,
      },
      {
        name: 'held out only by name: message says so, fix reuses the training fit',
        code: `${SK}def prepare(X_train, X_test):\n    scaler = StandardScaler()\n    X_train = scaler.fit_transform(X_train)\n    X_test = scaler.fit_transform(X_test)\n#            ^^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-refit-on-holdout:refitByName\n    return X_train, X_test\n`,
        output: `${SK}def prepare(X_train, X_test):\n    scaler = StandardScaler()\n    X_train = scaler.fit_transform(X_train)\n    X_test = scaler.transform(X_test)\n    return X_train, X_test\n`,
        verify(found) {
          if (!found[0].message.includes('held out judging only by the name `X_test` (no split was seen)')) throw new Error(found[0].message);
        },
      },
      {
        name: 'fit (not fit_transform) on the test part: reported without a fix',
        code: `${SK}def holdout(X, y):\n    X_train, X_test, y_train, y_test = train_test_split(X, y)\n    scaler = StandardScaler().fit(X_train)\n    scaler.fit(X_test)\n#   ^^^^^^^^^^^^^^^^^^ norm-refit-on-holdout:refit\n    return scaler.transform(X_test)\n`,
      },
      {
        name: 'refit on the validation fold inside a KFold loop, with the fix',
        code: `${SK}def folds(X, y):\n    scaler = StandardScaler()\n    for tr, te in KFold(n_splits=5).split(X):\n        a = scaler.fit_transform(X[tr])\n        b = scaler.fit_transform(X[te])\n#           ^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-refit-on-holdout:refit\n        print(LogisticRegression().fit(a, y[tr]).score(b, y[te]))\n`,
        output: `${SK}def folds(X, y):\n    scaler = StandardScaler()\n    for tr, te in KFold(n_splits=5).split(X):\n        a = scaler.fit_transform(X[tr])\n        b = scaler.transform(X[te])\n        print(LogisticRegression().fit(a, y[tr]).score(b, y[te]))\n`,
      },
      {
        name: 'a helper that refits whatever it is given, called on the test part: reported in the helper, no fix',
        code: `${SK}def scale(X):\n    return StandardScaler().fit_transform(X)\n#          ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-refit-on-holdout:refit\ndef holdout(X, y):\n    X_train, X_test, y_train, y_test = train_test_split(X, y)\n    return scale(X_train), scale(X_test)\n`,
        verify(found) {
          if (!found[0].message.includes('fits StandardScaler on `X_test`, the held-out part of `train_test_split(...)` (main.py:8)')) throw new Error(found[0].message);
        },
      },
      {
        name: 'a second scaler fitted on the test part: nothing fitted on training under that name, no fix',
        code: `${SK}def holdout(X, y):\n    X_train, X_test, y_train, y_test = train_test_split(X, y)\n    train_scaler = StandardScaler().fit(X_train)\n    test_scaler = StandardScaler()\n    X_test = test_scaler.fit_transform(X_test)\n#            ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-refit-on-holdout:refit\n    return train_scaler.transform(X_train), X_test\n`,
      },
    ],
  });
});
