"""Minimized fuzz findings, rebuilt as tiny models (test/fuzz/regressions.test.ts replays them).

Run: /usr/bin/python3 test-fixtures/fuzz-regressions/make.py   (Debian python3-onnx, numpy)
"""
import os
import numpy as np
import onnx
from onnx import helper, numpy_helper, TensorProto

HERE = os.path.dirname(os.path.abspath(__file__))


def save(name, nodes, inits, out_dims, note):
    graph = helper.make_graph(
        nodes, name,
        [helper.make_tensor_value_info('image', TensorProto.FLOAT, [1, 3, 8, 8])],
        [helper.make_tensor_value_info('logits', TensorProto.FLOAT, out_dims)],
        [numpy_helper.from_array(v, k) for k, v in inits.items()])
    model = helper.make_model(graph, opset_imports=[helper.make_opsetid('', 17)], producer_name='factfoil-fuzz-regression')
    model.ir_version = 8
    onnx.checker.check_model(model)
    onnx.save(model, os.path.join(HERE, name + '.onnx'))
    with open(os.path.join(HERE, name + '.txt'), 'w') as f:
        f.write(note.strip() + '\n')


rng = np.random.default_rng(7)
# Found by the fuzz harness (seed 1087, arch/vit with a LayerNormalization bias renamed to ''):
# onnxruntime 1.30 dies with SIGSEGV in its extended graph optimizations when LayerNormalization's
# optional bias is written as ''. core/model/load.ts now drops trailing empty inputs.
save('layernorm-empty-bias', [
    helper.make_node('Conv', ['image', 'w'], ['a'], name='conv', pads=[1, 1, 1, 1]),
    helper.make_node('LayerNormalization', ['a', 'scale', ''], ['n'], name='ln', axis=-1),
    helper.make_node('Relu', ['n'], ['r'], name='relu'),
    helper.make_node('GlobalAveragePool', ['r'], ['p'], name='gap'),
    helper.make_node('Flatten', ['p'], ['logits'], name='flat'),
], {'w': rng.standard_normal((4, 3, 3, 3)).astype(np.float32), 'scale': np.ones(8, np.float32)}, [1, 4], """
fuzz seed 1087: LayerNormalization with bias '' crashed onnxruntime 1.30 (SIGSEGV, extended optimizations).
Expected now: loads and explains (trailing empty inputs dropped in core/model/load.ts).
""")
