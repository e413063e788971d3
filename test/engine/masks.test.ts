// The mask view: which multiplications apply a random keep mask, and whether each is rescaled and training-gated.
import { expect, test } from 'vitest';
import { Views } from '../../server/src/engine/views';
import { maskApplications } from '../../server/src/engine/views/masks';
import { engineFor } from '../helpers/rule-tester';

const H = 'import torch\nimport torch.nn as nn\n';

/** Each application as "code-of-the-multiplication rescaled=.. gated=.." for the graph of class M in main.py. */
async function apps(code: string, cls = 'M'): Promise<string[]> {
  const e = await engineFor([], { 'main.py': code });
  const views = new Views(e.ws);
  const g = views.models.graphsIn('main.py').find((x) => x.className === cls);
  if (!g) throw new Error(`no graph for ${cls}`);
  return maskApplications(g, views.interp).map((a) => `${code.slice(a.span.start, a.span.end)} | mask=${code.slice(a.maskSpan.start, a.maskSpan.end)} | rescaled=${a.rescaled} gated=${a.gated}`);
}

const body = (fwd: string, extra = '') => `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.p = 0.2\n${extra}    def forward(self, x):\n${fwd}`;

test('a thresholded uniform draw is a mask; .float() keeps it one', async () => {
  expect(await apps(body('        m = (torch.rand(x.shape) < 0.8).float()\n        return x * m\n'))).toEqual([
    'x * m | mask=(torch.rand(x.shape) < 0.8).float() | rescaled=false gated=false',
  ]);
});

test('rescale found on the mask, on the product, on the stored name, or as a reciprocal factor', async () => {
  expect(await apps(body('        keep = 1 - self.p\n        m = torch.bernoulli(torch.full_like(x, keep)) / keep\n        return x * m\n'))).toEqual([
    'x * m | mask=torch.bernoulli(torch.full_like(x, keep)) / keep | rescaled=true gated=false',
  ]);
  expect(await apps(body('        keep = 1 - self.p\n        return x * torch.bernoulli(torch.full_like(x, keep)) / keep\n'))).toEqual([
    'x * torch.bernoulli(torch.full_like(x, keep)) | mask=torch.bernoulli(torch.full_like(x, keep)) | rescaled=true gated=false',
  ]);
  expect(await apps(body('        keep = 1 - self.p\n        out = x * (torch.rand_like(x) < keep)\n        out = out / keep\n        return out\n'))).toEqual([
    'x * (torch.rand_like(x) < keep) | mask=torch.rand_like(x) < keep | rescaled=true gated=false',
  ]);
  expect(await apps(body('        scale = 1.0 / (1 - self.p)\n        return x.mul(torch.rand_like(x) > self.p) * scale\n'))).toEqual([
    'x.mul(torch.rand_like(x) > self.p) | mask=torch.rand_like(x) > self.p | rescaled=true gated=false',
  ]);
});

test('gates: enclosing if, early return, conditional expression, caller gating', async () => {
  expect(await apps(body('        if self.training:\n            x = x * (torch.rand_like(x) > self.p)\n        return x\n'))).toEqual([
    'x * (torch.rand_like(x) > self.p) | mask=torch.rand_like(x) > self.p | rescaled=false gated=true',
  ]);
  expect(await apps(body('        if not self.training:\n            return x\n        return x * (torch.rand_like(x) > self.p)\n'))).toEqual([
    'x * (torch.rand_like(x) > self.p) | mask=torch.rand_like(x) > self.p | rescaled=false gated=true',
  ]);
  expect(await apps(body('        return x * (torch.rand_like(x) > self.p) if self.training else x\n'))).toEqual([
    'x * (torch.rand_like(x) > self.p) | mask=torch.rand_like(x) > self.p | rescaled=false gated=true',
  ]);
  // an early return on something else is no gate
  expect(await apps(body('        if x is None:\n            return x\n        return x * (torch.rand_like(x) > self.p)\n'))).toEqual([
    'x * (torch.rand_like(x) > self.p) | mask=torch.rand_like(x) > self.p | rescaled=false gated=false',
  ]);
  const helper = '    def _drop(self, h):\n        return h * (torch.rand_like(h) > self.p)\n';
  expect(await apps(body('        if self.training:\n            x = self._drop(x)\n        return x\n', helper))).toEqual([
    'h * (torch.rand_like(h) > self.p) | mask=torch.rand_like(h) > self.p | rescaled=false gated=true',
  ]);
  expect(await apps(body('        return self._drop(x)\n', helper))).toEqual([
    'h * (torch.rand_like(h) > self.p) | mask=torch.rand_like(h) > self.p | rescaled=false gated=false',
  ]);
});

test('callees are resolved by the interpreter: a user function named rand is no noise source', async () => {
  const code = `${H}def rand_like(t):\n    return t\nclass M(nn.Module):\n    def forward(self, x):\n        return x * (rand_like(x) > 0.5)\n`;
  expect(await apps(code)).toEqual([]);
  const aliased = `import torch.nn as nn\nfrom torch import rand_like as noise\nclass M(nn.Module):\n    def forward(self, x):\n        return x * (noise(x) > 0.5)\n`;
  expect(await apps(aliased)).toEqual(['x * (noise(x) > 0.5) | mask=noise(x) > 0.5 | rescaled=false gated=false']);
});

test('multiplying two masks together is not an application; a padding mask argument is no random mask', async () => {
  expect(await apps(body('        a = torch.rand_like(x) > 0.5\n        b = torch.rand_like(x) > 0.5\n        both = a * b\n        return x\n'))).toEqual([]);
  expect(await apps(`${H}class M(nn.Module):\n    def forward(self, x, mask):\n        return x * mask\n`)).toEqual([]);
  // a Bernoulli sample times a parameter (an RBM's visible units and bias) is sampling, not dropout
  expect(await apps(body('        v = torch.bernoulli(torch.sigmoid(x))\n        return (v * self.v_bias).sum()\n', '        self.v_bias = nn.Parameter(torch.zeros(8))\n'))).toEqual([]);
});
