// Table test for batchnorm-tiny-batch: the per-device batch traced from DataLoader(batch_size=...) across files
// (literals, constants, argparse defaults, a YAML file, a Hydra config) to the BatchNorm layers it trains.
import { expect, test } from 'vitest';
import rule from '../../rules/batchnorm-tiny-batch';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const MODELS = `import torch.nn as nn\n\n\nclass TrapNet(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.enc = nn.Sequential(nn.Conv2d(3, 16, 3, bias=False), nn.BatchNorm2d(16), nn.ReLU())\n#                                                                 ^^^^^^^^^^^^^^^^^^ batchnorm-tiny-batch\n        self.head = nn.Linear(16, 4)\n\n    def forward(self, x):\n        return self.head(self.enc(x).mean((2, 3)))\n`;
const MODELS_CLEAN = MODELS.split('\n').filter((l) => !l.includes('^^^')).join('\n');
const LOOP = `def train_one_epoch(model, loader, opt):\n    model.train()\n    for x, y in loader:\n        opt.zero_grad()\n        F.cross_entropy(model(x), y).backward()\n        opt.step()\n`;
/** `def main(cfg_path="configs/train.yaml")` reading the batch size from that file. */
const CFG_MAIN = `def main(cfg_path="configs/train.yaml"):\n    with open(cfg_path) as f:\n        cfg = yaml.safe_load(f)\n    model = TrapNet()\n    loader = DataLoader(None, batch_size=cfg["train"]["batch_size"])\n    train_one_epoch(model, loader, torch.optim.SGD(model.parameters(), lr=0.1))\n`;
const H = `import torch\nimport torch.nn.functional as F\nfrom torch.utils.data import DataLoader\n\nfrom models import TrapNet\n\n\n${LOOP}`;

test('batchnorm-tiny-batch', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      { name: 'batch of 64', code: { 'models.py': MODELS_CLEAN, 'train.py': `${H}\ndef main(ds):\n    model = TrapNet()\n    opt = torch.optim.SGD(model.parameters(), lr=0.1)\n    train_one_epoch(model, DataLoader(ds, batch_size=64, shuffle=True), opt)\n` } },
      {
        name: 'GroupNorm model on a batch of 2',
        code: `import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\nfrom torch.utils.data import DataLoader\n${LOOP}def main(ds):\n    model = nn.Sequential(nn.Conv2d(3, 16, 3), nn.GroupNorm(4, 16), nn.ReLU(), nn.Flatten(), nn.LazyLinear(4))\n    loader = DataLoader(ds, batch_size=2)\n    train_one_epoch(model, loader, torch.optim.SGD(model.parameters(), lr=0.1))\n`,
      },
      { name: 'batch size not known statically', code: { 'models.py': MODELS_CLEAN, 'train.py': `${H}\ndef main(ds, bs):\n    model = TrapNet()\n    loader = DataLoader(ds, batch_size=bs)\n    train_one_epoch(model, loader, torch.optim.SGD(model.parameters(), lr=0.1))\n` } },
      {
        name: 'SyncBatchNorm conversion under DDP: statistics over the global batch',
        code: { 'models.py': MODELS_CLEAN, 'train.py': `${H}from torch.nn.parallel import DistributedDataParallel as DDP\n\n\ndef main(ds, rank):\n    net = TrapNet()\n    net = torch.nn.SyncBatchNorm.convert_sync_batchnorm(net)\n    model = DDP(net.to(rank), device_ids=[rank])\n    loader = DataLoader(ds, batch_size=4)\n    train_one_epoch(model, loader, torch.optim.SGD(model.parameters(), lr=0.1))\n` },
      },
      {
        name: 'nn.DataParallel with 32 and an unknown device count: cannot tell',
        code: { 'models.py': MODELS_CLEAN, 'train.py': `${H}\ndef main(ds):\n    model = torch.nn.DataParallel(TrapNet())\n    loader = DataLoader(ds, batch_size=32)\n    train_one_epoch(model, loader, torch.optim.SGD(model.parameters(), lr=0.1))\n` },
      },
      {
        name: 'threshold lowered in the config',
        options: { thresholds: { minBatchPerDevice: 8 } },
        code: { 'models.py': MODELS_CLEAN, 'train.py': `${H}\ndef main(ds):\n    model = TrapNet()\n    train_one_epoch(model, DataLoader(ds, batch_size=8), torch.optim.SGD(model.parameters(), lr=0.1))\n` },
      },
      {
        name: 'BatchNorm layers frozen in eval for small-batch fine-tuning (loop over model.modules())',
        code: { 'models.py': MODELS_CLEAN, 'train.py': `${H}\ndef main(ds):\n    model = TrapNet()\n    opt = torch.optim.SGD(model.parameters(), lr=0.01)\n    for epoch in range(3):\n        model.train()\n        for m in model.modules():\n            if isinstance(m, torch.nn.BatchNorm2d):\n                m.eval()\n        for x, y in DataLoader(ds, batch_size=2):\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n` },
      },
      {
        name: 'the encoder holding the BatchNorm is kept in eval after model.train()',
        code: { 'models.py': MODELS_CLEAN, 'train.py': `${H}\ndef main(ds):\n    model = TrapNet()\n    model.enc.requires_grad_(False)\n    opt = torch.optim.SGD(model.head.parameters(), lr=0.01)\n    model.train()\n    model.enc.eval()\n    for x, y in DataLoader(ds, batch_size=2):\n        opt.zero_grad()\n        F.cross_entropy(model(x), y).backward()\n        opt.step()\n` },
      },
      {
        name: 'config path default overridden by the only call: the batch size is not known',
        code: {
          'configs/train.yaml': 'train:\n  batch_size: 2\n',
          'models.py': MODELS_CLEAN,
          'train.py': `${H}import yaml\n\n\n${CFG_MAIN}\n\nif __name__ == "__main__":\n    main("configs/big.yaml")\n`,
        },
      },
      {
        name: 'config path default of a function handed to a command-line runner, which may pass another path',
        code: {
          'configs/train.yaml': 'train:\n  batch_size: 2\n',
          'models.py': MODELS_CLEAN,
          'train.py': `${H}import fire\nimport yaml\n\n\n${CFG_MAIN}\n\nif __name__ == "__main__":\n    main()\n    fire.Fire(main)\n`,
        },
      },
      {
        name: 'timm model on a batch of 2: its layers are not known',
        code: `import timm\nimport torch\nimport torch.nn.functional as F\nfrom torch.utils.data import DataLoader\n${LOOP}def main(ds):\n    model = timm.create_model("resnet50", pretrained=False)\n    train_one_epoch(model, DataLoader(ds, batch_size=2), torch.optim.SGD(model.parameters(), lr=0.1))\n`,
      },
      {
        name: 'only the evaluation loader is small',
        code: { 'models.py': MODELS_CLEAN, 'train.py': `${H}\ndef main(train_ds, val_ds):\n    model = TrapNet()\n    train_one_epoch(model, DataLoader(train_ds, batch_size=64), torch.optim.SGD(model.parameters(), lr=0.1))\n    model.eval()\n    with torch.no_grad():\n        for x, y in DataLoader(val_ds, batch_size=1):\n            model(x)\n` },
      },
    ],
    invalid: [
      {
        name: 'YAML config through yaml.safe_load, model in another module',
        code: {
          'configs/run.yaml': 'data:\n  root: data/crops\ntrain:\n  batch_size: 2\n  lr: 0.05\n',
          'models.py': MODELS,
          'train.py': `${H}import yaml\n\n\ndef main():\n    with open("configs/run.yaml") as fh:\n        cfg = yaml.safe_load(fh)\n    model = TrapNet()\n    loader = DataLoader(None, batch_size=cfg["train"]["batch_size"], shuffle=True)\n    train_one_epoch(model, loader, torch.optim.SGD(model.parameters(), lr=cfg["train"]["lr"]))\n`,
        },
        verify(found) {
          const f = found[0];
          if (f.message.indexOf('BatchNorm2d `enc.1` trains on 2 samples per device: batch_size 2 from configs/run.yaml:4 (train.batch_size)') !== 0) throw new Error(f.message);
          if (f.level !== 'warning' || f.path !== 'models.py') throw new Error(`${f.level} ${f.path}`);
          const cfg = f.related.find((r) => r.path === 'configs/run.yaml');
          if (!cfg || cfg.span.line !== 3) throw new Error(`related config line: ${JSON.stringify(f.related)}`);
        },
      },
      {
        name: 'config path as a parameter default, the script run as main()',
        code: {
          'configs/train.yaml': 'train:\n  batch_size: 2\n',
          'models.py': MODELS,
          'train.py': `${H}import yaml\n\n\n${CFG_MAIN}\n\nif __name__ == "__main__":\n    main()\n`,
        },
        verify(found) {
          expect(found[0].message).toBe('BatchNorm2d `enc.1` trains on 2 samples per device: batch_size 2 from configs/train.yaml:2 (train.batch_size). Batch statistics over so few samples are noisy (Wu & He 2018: about 34.7% ResNet-50 ImageNet error with BatchNorm at 2 images per device, 24.1% with GroupNorm). Use a larger batch, GroupNorm, or SyncBatchNorm under DDP.');
        },
      },
      {
        name: 'argparse default in the training script',
        code: {
          'models.py': MODELS,
          'train.py': `${H}import argparse\n\n\ndef main():\n    parser = argparse.ArgumentParser()\n    parser.add_argument("--batch-size", type=int, default=4)\n    args = parser.parse_args()\n    model = TrapNet()\n    loader = DataLoader(None, batch_size=args.batch_size)\n    train_one_epoch(model, loader, torch.optim.SGD(model.parameters(), lr=0.1))\n`,
        },
        verify(found) {
          if (!found[0].message.includes('batch_size 4 from train.py:19 (--batch-size default)')) throw new Error(found[0].message);
        },
      },
      {
        name: 'Hydra config cfg.train.batch_size under config_path/config_name',
        code: {
          'conf/config.yaml': 'train:\n  epochs: 3\n  batch_size: 8\n',
          'models.py': MODELS,
          'train.py': `${H}import hydra\n\n\n@hydra.main(config_path="conf", config_name="config", version_base=None)\ndef main(cfg):\n    model = TrapNet()\n    loader = DataLoader(None, batch_size=cfg.train.batch_size)\n    opt = torch.optim.SGD(model.parameters(), lr=0.1)\n    for epoch in range(cfg.train.epochs):\n        train_one_epoch(model, loader, opt)\n`,
        },
        verify(found) {
          if (!found[0].message.includes('trains on 8 samples per device: batch_size 8 from conf/config.yaml:3 (train.batch_size)')) throw new Error(found[0].message);
        },
      },
      {
        name: 'click option default',
        code: {
          'models.py': MODELS,
          'train.py': `${H}import click\n\n\n@click.command()\n@click.option("--batch-size", default=6, type=int)\ndef main(batch_size):\n    model = TrapNet()\n    loader = DataLoader(None, batch_size=batch_size)\n    train_one_epoch(model, loader, torch.optim.SGD(model.parameters(), lr=0.1))\n`,
        },
        verify(found) {
          if (!found[0].message.includes('batch_size 6 from train.py:18 (--batch-size default)')) throw new Error(found[0].message);
        },
      },
      {
        name: 'BatchNorm1d at one sample per step raises (error), inline loop, DataLoader default batch',
        code: `import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\nfrom torch.utils.data import DataLoader\nmodel = nn.Sequential(nn.Linear(12, 32, bias=False), nn.BatchNorm1d(32), nn.ReLU(), nn.Linear(32, 3))\n#                                                    ^^^^^^^^^^^^^^^^^^ batchnorm-tiny-batch:raises\nopt = torch.optim.Adam(model.parameters())\nfor x, y in DataLoader(None):\n    opt.zero_grad()\n    F.cross_entropy(model(x), y).backward()\n    opt.step()\n`,
        verify(found) {
          if (found[0].level !== 'error' || !found[0].message.includes('the DataLoader default batch_size 1')) throw new Error(`${found[0].level} ${found[0].message}`);
        },
      },
      {
        name: 'nn.DataParallel splits 32 over 4 devices; GroupNorm suggested',
        options: { thresholds: { devicesPerProcess: 4 } },
        code: `import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\nfrom torch.utils.data import DataLoader\nBATCH = 32\nnet = nn.Sequential(nn.Conv2d(3, 64, 3, bias=False), nn.BatchNorm2d(64), nn.ReLU(), nn.Flatten(), nn.LazyLinear(4))\n#                                                    ^^^^^^^^^^^^^^^^^^ batchnorm-tiny-batch:tiny\nmodel = nn.DataParallel(net)\nopt = torch.optim.SGD(model.parameters(), lr=0.1)\nfor x, y in DataLoader(None, batch_size=BATCH):\n    opt.zero_grad()\n    F.cross_entropy(model(x), y).backward()\n    opt.step()\n`,
        fixKind: 'suggested',
        output: `import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\nfrom torch.utils.data import DataLoader\nBATCH = 32\nnet = nn.Sequential(nn.Conv2d(3, 64, 3, bias=False), nn.GroupNorm(32, 64), nn.ReLU(), nn.Flatten(), nn.LazyLinear(4))\nmodel = nn.DataParallel(net)\nopt = torch.optim.SGD(model.parameters(), lr=0.1)\nfor x, y in DataLoader(None, batch_size=BATCH):\n    opt.zero_grad()\n    F.cross_entropy(model(x), y).backward()\n    opt.step()\n`,
        verify(found) {
          if (!found[0].message.includes('trains on 8 samples per device: batch_size 32 from main.py:5, split by nn.DataParallel across 4 devices')) throw new Error(found[0].message);
        },
      },
    ],
  });
});
