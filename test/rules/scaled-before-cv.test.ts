// Table test for scaled-before-cv: pre-scaled features given to cross-validation; quiet for Pipelines and per-fold fits.
import { test } from 'vitest';
import rule from '../../rules/scaled-before-cv';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const SK = 'import numpy as np\nfrom sklearn.model_selection import GridSearchCV, StratifiedKFold, cross_val_score, cross_validate\nfrom sklearn.pipeline import make_pipeline\nfrom sklearn.preprocessing import MinMaxScaler, StandardScaler\nfrom sklearn.svm import SVC\n';

test('scaled-before-cv', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'scaler inside the pipeline that is cross-validated',
        code: `${SK}def cv(X, y):\n    return cross_val_score(make_pipeline(StandardScaler(), SVC()), X, y, cv=5)\n`,
      },
      {
        name: 'grid search over a pipeline on raw features',
        code: `${SK}def search(X, y):\n    pipe = make_pipeline(MinMaxScaler(), SVC())\n    return GridSearchCV(pipe, {"svc__C": [0.1, 1, 10]}, cv=5).fit(X, y)\n`,
      },
      {
        name: 'a scaler fitted inside each fold of a K-fold loop',
        code: `${SK}def folds(X, y):\n    for tr, te in StratifiedKFold(n_splits=5).split(X, y):\n        scaler = StandardScaler().fit(X[tr])\n        clf = SVC().fit(scaler.transform(X[tr]), y[tr])\n        print(clf.score(scaler.transform(X[te]), y[te]))\n`,
      },
      {
        name: 'statistics from a separate reference set',
        code: `${SK}def cv(X_ref, X, y):\n    scaler = StandardScaler().fit(X_ref)\n    return cross_val_score(SVC(), scaler.transform(X), y, cv=5)\n`,
      },
      {
        name: 'scaled for a look, never cross-validated',
        code: `${SK}X = np.load("features.npy")\nX_s = StandardScaler().fit_transform(X)\nprint(X_s.std(axis=0))\n`,
      },
    ],
    invalid: [
      {
        name: 'cross_val_score on features scaled with all rows',
        code: `${SK}def cv(X, y):\n    X_scaled = StandardScaler().fit_transform(X)\n#              ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ scaled-before-cv:prescaled\n    return cross_val_score(SVC(), X_scaled, y, cv=5)\n`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('`cross_val_score(...)` (main.py:8)') || !m.includes('`make_pipeline(StandardScaler(), model)`')) throw new Error(m);
        },
      },
      {
        name: 'GridSearchCV fitted on pre-scaled features',
        code: `${SK}def search(X, y):\n    scaler = MinMaxScaler()\n    X_s = scaler.fit_transform(X)\n#         ^^^^^^^^^^^^^^^^^^^^^^^ scaled-before-cv:prescaled\n    return GridSearchCV(SVC(), {"C": [1, 10]}, cv=3).fit(X_s, y)\n`,
        verify(found) {
          if (!found[0].message.includes('`make_pipeline(MinMaxScaler(), model)`') || !found[0].message.includes('GridSearchCV.fit(...)')) throw new Error(found[0].message);
        },
      },
      {
        name: 'a K-fold loop over pre-scaled features',
        code: `${SK}def folds(X, y):\n    X = StandardScaler().fit(X).transform(X)\n    for tr, te in StratifiedKFold(n_splits=5).split(X, y):\n        print(SVC().fit(X[tr], y[tr]).score(X[te], y[te]))\n`.replace('    X = StandardScaler().fit(X).transform(X)\n', '    X = StandardScaler().fit(X).transform(X)\n#       ^^^^^^^^^^^^^^^^^^^^^^^ scaled-before-cv:prescaled\n'),
      },
      {
        name: 'hand-written standardisation before cross_validate',
        code: `${SK}def cv(X, y):\n    X = (X - X.mean(axis=0)) / X.std(axis=0)\n#            ^^^^^^^^^^^^^^ scaled-before-cv:prescaledStats\n    return cross_validate(SVC(), X, y, cv=5)\n`,
        verify(found) {
          if (!found[0].message.includes('`make_pipeline(StandardScaler(), model)`')) throw new Error(found[0].message);
        },
      },
    ],
  });
});
