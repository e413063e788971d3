// Seeded corpus generator for the benchmark: projects of model, training and data scripts in the samples' idioms.
import * as fs from 'node:fs';
import * as path from 'node:path';

/** mulberry32: a small, fast, seedable PRNG, so every run writes the same corpus. */
export function rng(seed) {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

const NOUNS = ['trap', 'hive', 'pollen', 'wing', 'brood', 'comb', 'nectar', 'forager', 'meadow', 'clover', 'drone', 'queen', 'swarm', 'bloom', 'petal', 'frame', 'entrance', 'mite', 'weight', 'hum'];
const PARTS = ['Stem', 'Block', 'Head', 'Encoder', 'Tower', 'Stage', 'Branch', 'Neck', 'Fuse', 'Adapter'];

function pick(r, xs) {
  return xs[Math.floor(r() * xs.length)];
}
function int(r, lo, hi) {
  return lo + Math.floor(r() * (hi - lo + 1));
}
function cap(s) {
  return s[0].toUpperCase() + s.slice(1);
}

/** A model module: helpers, blocks with norm_layer parameters, Sequential stacks, a network; some planted mistakes. */
function modelFile(r, tag) {
  const w = [int(r, 2, 6) * 8, int(r, 3, 8) * 8, int(r, 4, 16) * 8];
  const name = `${cap(pick(r, NOUNS))}${pick(r, PARTS)}${tag}`;
  const bias = r() < 0.3 ? '' : ', bias=False';
  const drop = (r() * 0.5).toFixed(2);
  const fdrop = r() < 0.3 ? `F.dropout(x, p=${drop})` : `F.dropout(x, p=${drop}, training=self.training)`;
  const lines = [];
  lines.push(`"""${name}: a small CNN for ${pick(r, NOUNS)} crops (generated for the benchmark)."""`, '');
  lines.push('import functools', 'from collections import OrderedDict', '', 'import torch', 'import torch.nn as nn', 'import torch.nn.functional as F', '');
  lines.push(`WIDTHS_${tag} = (${w.join(', ')})`, `MOMENTUM_${tag} = ${(r() * 0.2).toFixed(2)}`, '', '');
  lines.push(`def conv3x3_${tag}(cin, cout, stride=1):`, `    return nn.Conv2d(cin, cout, kernel_size=3, stride=stride, padding=1${bias})`, '', '');
  lines.push(`def norm_${tag}(ch):`, `    return nn.BatchNorm2d(ch, momentum=MOMENTUM_${tag})`, '', '');
  lines.push(`class Block${tag}(nn.Module):`, '    def __init__(self, cin, cout, stride=1, norm_layer=None):', '        super().__init__()', '        if norm_layer is None:', '            norm_layer = nn.BatchNorm2d');
  lines.push(`        self.conv1 = conv3x3_${tag}(cin, cout, stride)`, '        self.bn1 = norm_layer(cout)', '        self.relu = nn.ReLU(inplace=True)', `        self.conv2 = conv3x3_${tag}(cout, cout)`, '        self.bn2 = norm_layer(cout)');
  lines.push('        self.down = None', '        if stride != 1 or cin != cout:', `            self.down = nn.Sequential(nn.Conv2d(cin, cout, 1, stride=stride, bias=False), norm_layer(cout))`, '');
  lines.push('    def forward(self, x):', '        identity = x', '        out = self.relu(self.bn1(self.conv1(x)))', '        out = self.bn2(self.conv2(out))', '        if self.down is not None:', '            identity = self.down(x)', '        return self.relu(out + identity)', '', '');
  const nb = int(r, 2, 5);
  lines.push(`class ${name}(nn.Module):`, `    def __init__(self, num_classes=${int(r, 2, 20)}, in_ch=3):`, '        super().__init__()');
  lines.push(`        self.stem = nn.Sequential(OrderedDict([`, `            ("conv", nn.Conv2d(in_ch, WIDTHS_${tag}[0], kernel_size=5, stride=2, padding=2${r() < 0.5 ? '' : ', bias=False'})),`, `            ("bn", norm_${tag}(WIDTHS_${tag}[0])),`, '            ("act", nn.ReLU(inplace=True)),', '        ]))');
  lines.push('        layers = []', `        cin = WIDTHS_${tag}[0]`, `        for i, cout in enumerate(WIDTHS_${tag}):`, `            for j in range(${nb}):`, `                layers.append(Block${tag}(cin, cout, stride=2 if j == 0 and i > 0 else 1, norm_layer=functools.partial(nn.BatchNorm2d, eps=1e-5)))`, '                cin = cout', '        self.body = nn.Sequential(*layers)');
  lines.push(`        self.pool = nn.AdaptiveAvgPool2d(1)`, `        self.drop = nn.Dropout(${drop})`, `        self.fc = nn.Linear(WIDTHS_${tag}[-1], num_classes)`, '');
  lines.push('    def forward(self, x):', '        x = self.stem(x)', '        x = self.body(x)', '        x = torch.flatten(self.pool(x), 1)', `        x = ${fdrop}`, '        return self.fc(self.drop(x))', '', '');
  // an MLP tower in the hive-health style
  const h = int(r, 4, 16) * 16;
  lines.push(`class Tower${tag}(nn.Module):`, `    def __init__(self, n_in=${int(r, 8, 40)}, hidden=${h}, n_out=${int(r, 2, 5)}):`, '        super().__init__()', '        self.net = nn.Sequential(');
  for (let k = 0; k < int(r, 2, 4); k++) lines.push(`            nn.Linear(${k ? 'hidden' : 'n_in'}, hidden),`, '            nn.SELU(),', `            nn.AlphaDropout(${(r() * 0.2).toFixed(2)}),`);
  lines.push('            nn.Linear(hidden, n_out),', '        )', '', '    def forward(self, x):', '        return self.net(x)', '');
  return lines.join('\n');
}

/** A training script: argparse defaults, DataLoader, optimizer, train/eval loop. */
function trainFile(r, tag, modelModule, modelName) {
  const bs = pick(r, [2, 4, 8, 16, 32, 64]);
  const lines = [];
  lines.push(`"""Training entry point ${tag} (generated)."""`, '', 'import argparse', '', 'import torch', 'import torch.nn as nn', 'from torch.utils.data import DataLoader, TensorDataset', '');
  lines.push(`from ${modelModule} import ${modelName}`, '', '');
  lines.push('def parse_args():', '    p = argparse.ArgumentParser()', `    p.add_argument("--batch-size", type=int, default=${bs})`, `    p.add_argument("--lr", type=float, default=${(r() * 0.1).toFixed(3)})`, `    p.add_argument("--epochs", type=int, default=${int(r, 1, 90)})`, `    p.add_argument("--weight-decay", type=float, default=${pick(r, ['0.0', '1e-4', '5e-4'])})`, '    return p.parse_args()', '', '');
  lines.push('def evaluate(model, loader):');
  if (r() < 0.7) lines.push('    model.eval()');
  lines.push('    correct = 0', '    total = 0', '    with torch.no_grad():', '        for x, y in loader:', '            pred = model(x).argmax(1)', '            correct += (pred == y).sum().item()', '            total += y.numel()', '    return correct / max(total, 1)', '', '');
  lines.push('def main():', '    args = parse_args()', `    model = ${modelName}()`, `    data = TensorDataset(torch.randn(${int(r, 64, 512)}, 3, 64, 64), torch.randint(0, 2, (${int(r, 64, 512)},)))`);
  lines.push('    train_loader = DataLoader(data, batch_size=args.batch_size, shuffle=True)', '    val_loader = DataLoader(data, batch_size=args.batch_size)', '    opt = torch.optim.SGD(model.parameters(), lr=args.lr, momentum=0.9, weight_decay=args.weight_decay)', '    loss_fn = nn.CrossEntropyLoss()');
  lines.push('    for epoch in range(args.epochs):', '        model.train()', '        for x, y in train_loader:', '            opt.zero_grad()', '            loss = loss_fn(model(x), y)', '            loss.backward()', '            opt.step()', '        acc = evaluate(model, val_loader)', '        print(f"epoch {epoch}: {acc:.3f}")', '', '');
  lines.push('if __name__ == "__main__":', '    main()', '');
  return lines.join('\n');
}

/** A data script in the scikit-learn style: split, fit on train, transform. */
function dataFile(r, tag) {
  const lines = [];
  lines.push(`"""Tabular preprocessing ${tag} (generated)."""`, '', 'import numpy as np', 'from sklearn.model_selection import train_test_split', 'from sklearn.preprocessing import StandardScaler', '', '');
  lines.push(`def load_${tag}(path):`, '    table = np.genfromtxt(path, delimiter=",", names=True)', '    X = np.column_stack([table[n] for n in table.dtype.names[:-1]])', '    y = table[table.dtype.names[-1]].astype(int)', '    return X, y', '', '');
  lines.push(`def splits_${tag}(X, y, seed=${int(r, 0, 99)}):`, '    scaler = StandardScaler()');
  if (r() < 0.4) lines.push('    X = scaler.fit_transform(X)', `    X_train, X_val, y_train, y_val = train_test_split(X, y, test_size=${(0.1 + r() * 0.2).toFixed(2)}, random_state=seed)`);
  else lines.push(`    X_train, X_val, y_train, y_val = train_test_split(X, y, test_size=${(0.1 + r() * 0.2).toFixed(2)}, random_state=seed)`, '    X_train = scaler.fit_transform(X_train)', '    X_val = scaler.transform(X_val)');
  lines.push('    return X_train, X_val, y_train, y_val', '');
  return lines.join('\n');
}

/**
 * Writes projects until about `targetLines` lines exist under `dir`; returns the files and their line count.
 * Each project is a package with a model module, a training script that imports it, and a data script.
 */
export function generateCorpus(dir, targetLines, seed = 1) {
  const r = rng(seed);
  fs.rmSync(dir, { recursive: true, force: true });
  fs.mkdirSync(dir, { recursive: true });
  let lines = 0;
  let files = 0;
  for (let p = 0; lines < targetLines; p++) {
    const proj = path.join(dir, `proj_${String(p).padStart(4, '0')}`);
    fs.mkdirSync(proj, { recursive: true });
    const write = (name, text) => {
      fs.writeFileSync(path.join(proj, name), text);
      lines += text.split('\n').length - 1;
      files++;
    };
    write('__init__.py', `"""Project ${p}."""\n`);
    const nModels = int(r, 1, 3);
    for (let m = 0; m < nModels; m++) {
      const tag = `${p}_${m}`;
      const text = modelFile(r, tag);
      write(`models_${m}.py`, text);
      const modelName = /^class (\w+)\(nn\.Module\):\n    def __init__\(self, num_classes/m.exec(text)[1];
      write(`train_${m}.py`, trainFile(r, tag, `models_${m}`, modelName));
    }
    write('data.py', dataFile(r, String(p)));
  }
  return { lines, files };
}
