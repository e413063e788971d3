// Table test for batchnorm-unsynced-ddp: DDP around BatchNorm with a small per-process batch and no SyncBatchNorm.
import { test } from 'vitest';
import rule from '../../rules/batchnorm-unsynced-ddp';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = `import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\nfrom torch.nn.parallel import DistributedDataParallel\nfrom torch.utils.data import DataLoader\n\n\ndef make_net():\n    return nn.Sequential(nn.Conv2d(3, 16, 3, bias=False), nn.BatchNorm2d(16), nn.ReLU(), nn.Flatten(), nn.LazyLinear(4))\n\n\n`;
const LOOP = `    opt = torch.optim.SGD(model.parameters(), lr=0.02)\n    for x, y in loader:\n        opt.zero_grad()\n        F.cross_entropy(model(x), y).backward()\n        opt.step()\n`;

test('batchnorm-unsynced-ddp', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      { name: 'converted before wrapping', code: `${H}def main(ds, rank):\n    net = nn.SyncBatchNorm.convert_sync_batchnorm(make_net())\n    model = DistributedDataParallel(net.to(rank), device_ids=[rank])\n    loader = DataLoader(ds, batch_size=8)\n${LOOP}` },
      { name: 'large per-process batch', code: `${H}def main(ds, rank):\n    model = make_net().to(rank)\n    model = DistributedDataParallel(model, device_ids=[rank])\n    loader = DataLoader(ds, batch_size=64)\n${LOOP}` },
      { name: 'per-process batch not known', code: `${H}def main(ds, rank, bs):\n    model = make_net().to(rank)\n    model = DistributedDataParallel(model, device_ids=[rank])\n    loader = DataLoader(ds, batch_size=bs)\n${LOOP}` },
      { name: 'timm model under DDP: its layers are not known', code: `import timm\n${H}def main(ds, rank):\n    model = DistributedDataParallel(timm.create_model("resnet50").to(rank), device_ids=[rank])\n    loader = DataLoader(ds, batch_size=4)\n${LOOP}` },
      { name: 'GroupNorm model', code: `${H}def main(ds, rank):\n    model = nn.Sequential(nn.Conv2d(3, 16, 3), nn.GroupNorm(4, 16)).to(rank)\n    model = DistributedDataParallel(model, device_ids=[rank])\n    loader = DataLoader(ds, batch_size=4)\n${LOOP}` },
    ],
    invalid: [
      {
        name: 'wrapped without conversion, 8 per process',
        code: `${H}def main(ds, rank):\n    model = make_net().to(rank)\n    model = DistributedDataParallel(model, device_ids=[rank])\n#           ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ batchnorm-unsynced-ddp:unsynced\n    loader = DataLoader(ds, batch_size=8)\n${LOOP}`,
        fixKind: 'suggested',
        output: `${H}def main(ds, rank):\n    model = make_net().to(rank)\n    model = torch.nn.SyncBatchNorm.convert_sync_batchnorm(model)\n    model = DistributedDataParallel(model, device_ids=[rank])\n    loader = DataLoader(ds, batch_size=8)\n${LOOP}`,
        verify(found) {
          if (!found[0].message.includes('with 1 BatchNorm layer and 8 samples per process')) throw new Error(found[0].message);
        },
      },
    ],
  });
});
