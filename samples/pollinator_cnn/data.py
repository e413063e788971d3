"""Image transforms and datasets for the camera-trap crops."""

from torchvision import datasets, transforms

IMAGE_SIZE = 64
CROP_MEAN = (0.485, 0.456, 0.406)
CROP_STD = (0.229, 0.224, 0.225)

train_transform = transforms.Compose([
    transforms.RandomResizedCrop(IMAGE_SIZE, scale=(0.6, 1.0)),
    transforms.RandomHorizontalFlip(),
    transforms.ColorJitter(brightness=0.2, contrast=0.2, saturation=0.2),
    transforms.ToTensor(),
    transforms.Normalize(CROP_MEAN, CROP_STD),
])

eval_transform = transforms.Compose([
    transforms.Resize(72),
    transforms.CenterCrop(IMAGE_SIZE),
    transforms.ToTensor(),
    transforms.Normalize(CROP_MEAN, CROP_STD),
])


def crop_folder(root, split, transform):
    """Crops are stored as <root>/<split>/<class_name>/<trap>_<timestamp>.png."""
    return datasets.ImageFolder(f"{root}/{split}", transform=transform)
