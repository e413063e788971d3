// Table test for augment-on-eval-data: random steps in the transform of held-out data (by folder, train=False, split, name).
import { test } from 'vitest';
import rule from '../../rules/augment-on-eval-data';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const TV = 'from torchvision import datasets, transforms\nfrom torch.utils.data import random_split\n';

test('augment-on-eval-data', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'deterministic evaluation transform, random training transform',
        code: `${TV}def sets(root):\n    train_set = datasets.ImageFolder(f"{root}/train", transform=transforms.Compose([transforms.RandomResizedCrop(64), transforms.RandomHorizontalFlip(), transforms.ToTensor()]))\n    val_set = datasets.ImageFolder(f"{root}/val", transform=transforms.Compose([transforms.Resize(72), transforms.CenterCrop(64), transforms.ToTensor()]))\n    return train_set, val_set\n`,
      },
      {
        name: 'a flip switched off with p=0 and a blur with one fixed sigma',
        code: `${TV}def sets(root):\n    tf = transforms.Compose([transforms.RandomHorizontalFlip(p=0.0), transforms.GaussianBlur(5, sigma=1.0), transforms.ToTensor()])\n    return datasets.CIFAR10(root, train=False, transform=tf)\n`,
      },
      {
        name: 'augmenting transform on a training dataset only',
        code: `${TV}aug = transforms.Compose([transforms.ColorJitter(0.2, 0.2), transforms.RandomRotation(10), transforms.ToTensor()])\ntrain_ds = datasets.MNIST("data", train=True, transform=aug, download=True)\n`,
      },
      {
        name: 'folders before the dataset root say nothing about the split (/dev/shm, a user called test)',
        code: `${TV}aug = transforms.Compose([transforms.RandomCrop(32), transforms.ToTensor()])\nfast = datasets.ImageFolder("/dev/shm/crops", transform=aug)\nhome = datasets.ImageFolder("/home/test/projects/crops/train", transform=aug)\n`,
      },
      {
        name: 'the dataset under a random_split part given another transform afterwards',
        code: `${TV}def sets(root, eval_tf):\n    full = datasets.ImageFolder(root, transform=transforms.Compose([transforms.RandomResizedCrop(64), transforms.ToTensor()]))\n    train_ds, val_ds = random_split(full, [0.9, 0.1])\n    val_ds.dataset.transform = eval_tf\n    return train_ds, val_ds\n`,
      },
    ],
    invalid: [
      {
        name: 'random crop in the transform of the validation folder',
        code: `${TV}eval_tf = transforms.Compose([\n    transforms.RandomResizedCrop(64, scale=(0.8, 1.0)),\n#   ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ augment-on-eval-data:random\n    transforms.ToTensor(),\n])\nval_set = datasets.ImageFolder("data/val", transform=eval_tf)\n`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('`RandomResizedCrop` in the transform of `val_set` (held out by its argument "data/val")')) throw new Error(m);
          if (found[0].related[0]?.span.line !== 6) throw new Error('related should be the dataset');
        },
      },
      {
        name: 'train=False with colour jitter',
        code: `${TV}def test_set(root):\n    tf = transforms.Compose([transforms.ColorJitter(brightness=0.3), transforms.ToTensor()])\n#                            ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ augment-on-eval-data:random\n    return datasets.CIFAR100(root, train=False, transform=tf)\n`,
      },
      {
        name: 'the held-out part of random_split keeps the augmenting transform of the whole dataset',
        code: `${TV}def sets(root):\n    aug = transforms.Compose([transforms.RandomHorizontalFlip(), transforms.ColorJitter(0.2), transforms.ToTensor()])\n#                             ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ augment-on-eval-data:random\n#                                                                ^^^^^^^^^^^^^^^^^^^^^^^^^^^ augment-on-eval-data:random\n    full = datasets.ImageFolder(root, transform=aug)\n    train_ds, val_ds = random_split(full, [0.8, 0.2])\n    return train_ds, val_ds\n`,
        verify(found) {
          if (!found[0].message.includes('`val_ds` (part 2 of `random_split(...)` at main.py:6)')) throw new Error(found[0].message);
        },
      },
      {
        name: 'a transform set on the Subset itself is never used: still augmented',
        code: `${TV}def sets(root, eval_tf):\n    full = datasets.ImageFolder(root, transform=transforms.Compose([transforms.RandomResizedCrop(64), transforms.ToTensor()]))\n#                                                                   ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ augment-on-eval-data:random\n    train_ds, val_ds = random_split(full, [0.9, 0.1])\n    val_ds.transform = eval_tf\n    return train_ds, val_ds\n`,
      },
      {
        name: 'held out only by name',
        code: `from torchvision.transforms import v2\nclass Crops:\n    def __init__(self, paths, transform=None):\n        self.transform = transform\ndef sets(paths):\n    test_ds = Crops(paths, transform=v2.Compose([v2.RandomVerticalFlip(), v2.ToTensor()]))\n#                                                ^^^^^^^^^^^^^^^^^^^^^^^ augment-on-eval-data:random\n    return test_ds\n`,
        verify(found) {
          if (!found[0].message.includes('held out judging only by the name `test_ds`')) throw new Error(found[0].message);
        },
      },
    ],
  });
});
