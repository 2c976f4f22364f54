"""A 1000-class model for the end-to-end test: the parts line's catalogue of part variants.

A tiny residual CNN (64x64 RGB in, 1000 scores out, about 40k weights, untrained: the test
checks what the editor does with 1000 classes, not what the model knows) with its labels.txt
beside it and no sidecar, so preprocessing is guessed from the input shape and the labels are
found beside the model. Class names are invented: size x finish x part.

Regenerate: /usr/bin/python3 test-fixtures/catalog/make.py
"""
import os
import torch
from torch import nn

HERE = os.path.dirname(os.path.abspath(__file__))
SIZES = ['m2', 'm3', 'm4', 'm5', 'm6', 'm8', 'm10', 'm12', 'm16', 'm20']
FINISHES = ['plain', 'zinc', 'black', 'brass', 'nylon', 'steel', 'chrome', 'nickel', 'copper', 'galvanized']
PARTS = ['hex-nut', 'washer', 'bearing', 'spring', 'bolt', 'gear', 'clip', 'bracket', 'rivet', 'spacer']
LABELS = [f'{p}-{s}-{f}' for p in PARTS for s in SIZES for f in FINISHES]
assert len(LABELS) == 1000 and len(set(LABELS)) == 1000


class Block(nn.Module):
    def __init__(self, c):
        super().__init__()
        self.a = nn.Conv2d(c, c, 3, padding=1)
        self.b = nn.Conv2d(c, c, 3, padding=1)

    def forward(self, x):
        return torch.relu(x + self.b(torch.relu(self.a(x))))


class CatalogNet(nn.Module):
    def __init__(self):
        super().__init__()
        self.stem = nn.Conv2d(3, 16, 3, stride=2, padding=1)   # 32x32
        self.block1 = Block(16)
        self.down = nn.Conv2d(16, 24, 3, stride=2, padding=1)  # 16x16
        self.block2 = Block(24)
        self.head = nn.Linear(24, 1000)

    def forward(self, x):
        x = self.block1(torch.relu(self.stem(x)))
        x = self.block2(torch.relu(self.down(x)))
        return self.head(x.mean(dim=(2, 3)))


def main():
    torch.manual_seed(1000)
    net = CatalogNet().eval()
    out = os.path.join(HERE, 'catalog-sorter.onnx')
    torch.onnx.export(net, torch.zeros(1, 3, 64, 64), out, input_names=['image'], output_names=['logits'], opset_version=17)
    with open(os.path.join(HERE, 'labels.txt'), 'w') as f:
        f.write('\n'.join(LABELS) + '\n')
    print(f'wrote {out} ({os.path.getsize(out)} bytes) and labels.txt ({len(LABELS)} classes)')


if __name__ == '__main__':
    main()
