"""Sequence models that forecast tomorrow's hive weight from sensor logs.

Each hive scale logs every 15 minutes: weight, brood temperature, outside
temperature, humidity, rain and light. A window of WINDOW steps goes in; the
weight change over the next 24 h comes out.
"""

import torch
import torch.nn.functional as F
from torch import nn

N_FEATURES = 6
WINDOW = 96
EXAMPLE_INPUT_SHAPE = (2, WINDOW, N_FEATURES)

# carried over from the TensorFlow 1 prototype
HEAD_KEEP = 0.9


class HiveWeightLSTM(nn.Module):
    """Single-layer LSTM with a small regression head."""

    def __init__(self, n_features=N_FEATURES, hidden=64):
        super().__init__()
        self.lstm = nn.LSTM(input_size=n_features, hidden_size=hidden, num_layers=1, batch_first=True, dropout=0.2)
        self.head_drop = nn.Dropout(HEAD_KEEP)
        self.head = nn.Linear(hidden, 1)

    def forward(self, x):
        out, _ = self.lstm(x)
        last = out[:, -1, :]
        return self.head(self.head_drop(last)).squeeze(-1)


class StackedWeightLSTM(nn.Module):
    """Two stacked layers, so the LSTM's own dropout acts between them."""

    def __init__(self, n_features=N_FEATURES, hidden=96, head_dropout=0.25):
        super().__init__()
        self.lstm = nn.LSTM(n_features, hidden, num_layers=2, batch_first=True, dropout=0.2)
        self.proj = nn.Linear(hidden, 32)
        self.out = nn.Linear(32, 1)
        self.head_dropout = head_dropout

    def forward(self, x):
        seq, (h_n, c_n) = self.lstm(x)
        h = F.relu(self.proj(h_n[-1]))
        h = F.dropout(h, p=self.head_dropout, training=self.training)
        return self.out(h).squeeze(-1)
