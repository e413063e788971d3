// Table test for bias-before-norm: quiet idioms from real code, flagged cases with exact ranges and fixed text.
import { test } from 'vitest';
import rule from '../../rules/bias-before-norm';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch.nn as nn\nimport torch.nn.functional as F\n';

test('bias-before-norm', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'the conv output is also returned, so its bias is not cancelled everywhere it goes',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.lateral = nn.Conv2d(64, 64, 1)\n        self.bn = nn.BatchNorm2d(64)\n    def forward(self, x):\n        lat = self.lateral(x)\n        return self.bn(lat), lat\n`,
      },
      {
        name: 'the conv output also feeds a second layer and a residual sum',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(8, 8, 3, padding=1)\n        self.bn = nn.BatchNorm2d(8)\n        self.proj = nn.Conv2d(8, 4, 1)\n        self.conv2 = nn.Conv2d(8, 8, 3, padding=1)\n        self.bn2 = nn.BatchNorm2d(8)\n    def forward(self, x):\n        y = self.conv(x)\n        z = self.conv2(x)\n        return self.bn(y), self.proj(y), self.bn2(z) + z\n`,
      },
      {
        name: 'VGG cfg list: bias kept only when there is no BatchNorm (bias=not batch_norm)',
        code: `${H}cfg = [8, "M", 16, "M"]\ndef make_layers(cfg, batch_norm=False):\n    layers = []\n    in_channels = 3\n    for v in cfg:\n        if v == "M":\n            layers += [nn.MaxPool2d(2, 2)]\n        else:\n            conv2d = nn.Conv2d(in_channels, v, kernel_size=3, padding=1, bias=not batch_norm)\n            if batch_norm:\n                layers += [conv2d, nn.BatchNorm2d(v), nn.ReLU(inplace=True)]\n            else:\n                layers += [conv2d, nn.ReLU(inplace=True)]\n            in_channels = v\n    return nn.Sequential(*layers)\nclass VGG(nn.Module):\n    def __init__(self, bn=True):\n        super().__init__()\n        self.features = make_layers(cfg, batch_norm=bn)\n    def forward(self, x):\n        return self.features(x)\n`,
      },
      {
        name: 'MobileNetV2 ConvBNActivation: an nn.Sequential subclass whose conv has bias=False',
        code: `${H}class ConvBNReLU(nn.Sequential):\n    def __init__(self, i, o, stride=1, norm_layer=None):\n        if norm_layer is None:\n            norm_layer = nn.BatchNorm2d\n        super().__init__(nn.Conv2d(i, o, 3, stride, 1, bias=False), norm_layer(o), nn.ReLU6(inplace=True))\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.features = nn.Sequential(ConvBNReLU(3, 8, 2), ConvBNReLU(8, 16))\n    def forward(self, x):\n        return self.features(x)\n`,
      },
      {
        name: 'activation between conv and BatchNorm',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 8, 3)\n        self.bn = nn.BatchNorm2d(8)\n    def forward(self, x):\n        return self.bn(F.relu(self.conv(x)))\n`,
      },
      {
        name: 'LayerNorm after Linear keeps the bias meaningful',
        code: `${H}net = None\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Linear(8, 8), nn.LayerNorm(8))\n    def forward(self, x):\n        return self.body(x)\n`,
      },
      {
        name: 'GroupNorm with fewer groups than channels',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Conv2d(3, 32, 3), nn.GroupNorm(8, 32))\n    def forward(self, x):\n        return self.body(x)\n`,
      },
      {
        name: 'bias=False passed through a helper',
        code: `${H}def conv3x3(i, o):\n    return nn.Conv2d(i, o, 3, padding=1, bias=False)\nclass M(nn.Module):\n    def __init__(self, norm_layer=None):\n        super().__init__()\n        if norm_layer is None:\n            norm_layer = nn.BatchNorm2d\n        self.conv = conv3x3(3, 16)\n        self.bn = norm_layer(16)\n    def forward(self, x):\n        return self.bn(self.conv(x))\n`,
      },
      {
        name: 'residual add between conv and BatchNorm',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(8, 8, 3, padding=1)\n        self.bn = nn.BatchNorm2d(8)\n    def forward(self, x):\n        out = self.conv(x)\n        out += x\n        return self.bn(out)\n`,
      },
    ],
    invalid: [
      {
        name: 'nn.Sequential subclass passing conv and BatchNorm to super().__init__: the inherited forward chains them',
        code: `${H}class ConvBN(nn.Sequential):\n    def __init__(self, i, o):\n        super().__init__(nn.Conv2d(i, o, 3, padding=1), nn.BatchNorm2d(o))\n#                        ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ bias-before-norm\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.stem = ConvBN(3, 8)\n    def forward(self, x):\n        return self.stem(x)\n`,
        output: `${H}class ConvBN(nn.Sequential):\n    def __init__(self, i, o):\n        super().__init__(nn.Conv2d(i, o, 3, padding=1, bias=False), nn.BatchNorm2d(o))\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.stem = ConvBN(3, 8)\n    def forward(self, x):\n        return self.stem(x)\n`,
        verify(found) {
          // reported once, from the subclass's own graph (the parent's graph sees the same pair as stem.0 > stem.1)
          if (found.length !== 1 || !found[0].message.includes('Conv2d `0`') || !found[0].message.includes('BatchNorm2d `1`')) throw new Error(found.map((f) => f.message).join('\n'));
        },
      },
      {
        name: 'Sequential conv then BatchNorm',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Conv2d(3, 16, 3), nn.BatchNorm2d(16), nn.ReLU())\n#                                 ^^^^^^^^^^^^^^^^^^^ bias-before-norm:cancelled\n    def forward(self, x):\n        return self.body(x)\n`,
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Conv2d(3, 16, 3, bias=False), nn.BatchNorm2d(16), nn.ReLU())\n    def forward(self, x):\n        return self.body(x)\n`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('Conv2d `body.0`') || !m.includes('BatchNorm2d `body.1` (main.py:6)') || !m.includes('16 bias parameters')) throw new Error(m);
          if (found[0].related[0]?.span.line !== 5) throw new Error('related location should point at the BatchNorm');
        },
      },
      {
        name: 'nested call in forward with norm_layer default and an explicit bias=True',
        code: `${H}from torch.nn import BatchNorm2d as BN\nclass M(nn.Module):\n    def __init__(self, norm_layer=BN):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 8, kernel_size=3, bias=True)\n#                   ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ bias-before-norm\n        self.bn = norm_layer(8)\n    def forward(self, x):\n        return self.bn(self.conv(x))\n`,
        output: `${H}from torch.nn import BatchNorm2d as BN\nclass M(nn.Module):\n    def __init__(self, norm_layer=BN):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 8, kernel_size=3, bias=False)\n        self.bn = norm_layer(8)\n    def forward(self, x):\n        return self.bn(self.conv(x))\n`,
      },
      {
        name: 'GroupNorm with one channel per group behaves like InstanceNorm',
        code: `import torch\nclass M(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = torch.nn.Conv2d(3, 4, 3)\n#                   ^^^^^^^^^^^^^^^^^^^^^^^^ bias-before-norm\n        self.gn = torch.nn.GroupNorm(4, 4)\n    def forward(self, x):\n        x = self.conv(x)\n        x = self.gn(x)\n        return x\n`,
        output: `import torch\nclass M(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = torch.nn.Conv2d(3, 4, 3, bias=False)\n        self.gn = torch.nn.GroupNorm(4, 4)\n    def forward(self, x):\n        x = self.conv(x)\n        x = self.gn(x)\n        return x\n`,
      },
    ],
  });
});
