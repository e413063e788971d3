"""Loading and preprocessing of the hive-health table.

One row per colony inspection: 8 sensor summaries, 4 inspection scores and the
inspector's verdict (0 healthy, 1 queenless, 2 varroa-stressed).
"""

import numpy as np
from sklearn.impute import SimpleImputer
from sklearn.model_selection import train_test_split
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

FEATURE_NAMES = (
    "weight_trend", "brood_temp_mean", "brood_temp_spread", "humidity",
    "hum_band_200hz", "hum_band_400hz", "entrance_traffic", "night_weight_loss",
    "brood_pattern", "stores", "temper", "mites_per_100",
)


def load_inspections(path):
    table = np.genfromtxt(path, delimiter=",", names=True)
    X = np.column_stack([table[name] for name in FEATURE_NAMES])
    y = table["verdict"].astype(int)
    return X, y


def make_preprocessor():
    """Imputation and scaling, to be fitted inside whatever estimator uses it."""
    return make_pipeline(SimpleImputer(strategy="median"), StandardScaler())


def scaled_splits(X, y, seed=0):
    """Train/validation arrays for the torch models, already standardised."""
    scaler = StandardScaler()
    X = scaler.fit_transform(X)
    X_train, X_val, y_train, y_val = train_test_split(X, y, test_size=0.2, stratify=y, random_state=seed)
    return X_train, X_val, y_train, y_val, scaler
