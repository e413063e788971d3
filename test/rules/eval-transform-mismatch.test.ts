// Table test for eval-transform-mismatch: training and evaluation transform chains compared step by step, constants by value.
import { test } from 'vitest';
import rule from '../../rules/eval-transform-mismatch';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const TV = 'from torchvision import datasets, transforms\nfrom torch.utils.data import DataLoader, random_split\nMEAN = (0.485, 0.456, 0.406)\nSTD = (0.229, 0.224, 0.225)\n';

test('eval-transform-mismatch', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'same constants written as names and as literals',
        code: `${TV}def loaders(root):\n    train_tf = transforms.Compose([transforms.RandomCrop(32, padding=4), transforms.ToTensor(), transforms.Normalize(MEAN, STD)])\n    test_tf = transforms.Compose([transforms.ToTensor(), transforms.Normalize((0.485, 0.456, 0.406), [0.229, 0.224, 0.225])])\n    train = datasets.CIFAR10(root, train=True, transform=train_tf, download=True)\n    test = datasets.CIFAR10(root, train=False, transform=test_tf, download=True)\n    return DataLoader(train, batch_size=128, shuffle=True), DataLoader(test, batch_size=256)\n`,
      },
      {
        name: 'neither chain normalizes',
        code: `${TV}def sets(root):\n    train_set = datasets.ImageFolder(root + "/train", transform=transforms.Compose([transforms.RandomHorizontalFlip(), transforms.ToTensor()]))\n    val_set = datasets.ImageFolder(root + "/val", transform=transforms.ToTensor())\n    return train_set, val_set\n`,
      },
      {
        name: 'both parts of random_split share one transform',
        code: `${TV}def sets(root):\n    tf = transforms.Compose([transforms.Resize(64), transforms.ToTensor(), transforms.Normalize(MEAN, STD)])\n    full = datasets.ImageFolder(root, transform=tf)\n    train_set, val_set = random_split(full, [0.8, 0.2])\n    return train_set, val_set\n`,
      },
      {
        name: 'evaluation constants computed the same way as training',
        code: `${TV}SCALE = 255.0\nMEAN_255 = (123.675, 116.28, 103.53)\ndef sets(root):\n    norm = transforms.Normalize([m / SCALE for m in MEAN_255], STD)\n    train_set = datasets.ImageFolder(root + "/train", transform=transforms.Compose([transforms.ToTensor(), norm]))\n    val_set = datasets.ImageFolder(root + "/val", transform=transforms.Compose([transforms.ToTensor(), transforms.Normalize([m / SCALE for m in MEAN_255], STD)]))\n    return train_set, val_set\n`,
      },
    ],
    invalid: [
      {
        name: 'validation folder without Normalize',
        code: `${TV}train_tf = transforms.Compose([transforms.RandomResizedCrop(64), transforms.ToTensor(), transforms.Normalize(MEAN, STD)])\nval_tf = transforms.Compose([\n#        ^^^^^^^^^^^^^^^^^^^ eval-transform-mismatch:missing\n    transforms.Resize(72),\n    transforms.CenterCrop(64),\n    transforms.ToTensor(),\n])\ntrain_set = datasets.ImageFolder("data/crops/train", transform=train_tf)\nval_set = datasets.ImageFolder("data/crops/val", transform=val_tf)\n`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('`val_set` (held out by its argument "data/crops/val")') || !m.includes('mean=(0.485, 0.456, 0.406), std=(0.229, 0.224, 0.225) (main.py:5)')) throw new Error(m);
        },
      },
      {
        name: 'test split normalized with other constants (train=False)',
        code: `${TV}def loaders(root):\n    train = datasets.CIFAR10(root, train=True, transform=transforms.Compose([transforms.ToTensor(), transforms.Normalize(MEAN, STD)]))\n    test = datasets.CIFAR10(root, train=False, transform=transforms.Compose([transforms.ToTensor(), transforms.Normalize((0.5, 0.5, 0.5), (0.5, 0.5, 0.5))]))\n#                                                        ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ eval-transform-mismatch:constants\n    return train, test\n`,
        verify(found) {
          if (!found[0].message.includes('held out by its argument train=False') || !found[0].message.includes('mean=(0.5, 0.5, 0.5)')) throw new Error(found[0].message);
        },
      },
      {
        name: 'a custom dataset held out only by its name, v2 transforms',
        code: `from torchvision.transforms import v2\nclass Crops:\n    def __init__(self, paths, transform=None):\n        self.paths = paths\n        self.transform = transform\ndef sets(train_paths, other_paths):\n    train_ds = Crops(train_paths, transform=v2.Compose([v2.ToTensor(), v2.Normalize([0.5], [0.25])]))\n    val_ds = Crops(other_paths, transform=v2.Compose([v2.ToTensor()]))\n#                                         ^^^^^^^^^^^^^^^^^^^^^^^^^^^ eval-transform-mismatch:missing\n    return train_ds, val_ds\n`,
        verify(found) {
          if (!found[0].message.includes('held out judging only by the name `val_ds`')) throw new Error(found[0].message);
        },
      },
    ],
  });
});
