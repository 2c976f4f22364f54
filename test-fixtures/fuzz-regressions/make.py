"""Minimized fuzz findings, rebuilt as tiny models (test/fuzz/regressions.test.ts replays them).

Run: /usr/bin/python3 test-fixtures/fuzz-regressions/make.py   (Debian python3-onnx, numpy)
"""
import os
import numpy as np
import onnx
from onnx import helper, numpy_helper, TensorProto

HERE = os.path.dirname(os.path.abspath(__file__))


def save(name, nodes, inits, out_dims, note, in_dims=(1, 3, 8, 8)):
    graph = helper.make_graph(
        nodes, name,
        [helper.make_tensor_value_info('image', TensorProto.FLOAT, list(in_dims))],
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

# Found by the fuzz harness (seed 201553, arch/mnasnet with input width 65535): the probe and the
# map ran for over a minute on a 64×65535 input (the per-case limit called it a hang). Inputs
# with a side over 8192 are now refused when the model is loaded (core/model/load.ts).
save('huge-input-side', [
    helper.make_node('Conv', ['image', 'w'], ['a'], name='conv', pads=[1, 1, 1, 1]),
    helper.make_node('GlobalAveragePool', ['a'], ['p'], name='gap'),
    helper.make_node('Flatten', ['p'], ['logits'], name='flat'),
], {'w': rng.standard_normal((4, 3, 3, 3)).astype(np.float32)}, [1, 4], """
fuzz seed 201553: an input of [1,3,64,65535] ran past the per-case time limit (probe + map on 4M pixels).
Expected now: a UserError at load naming dimension 3 (over 8192).
""", in_dims=(1, 3, 64, 65535))

# Found by the fuzz harness (seed 300285, arch/squeezenet with input height 3): pooling shrinks a
# tensor's height to 0, and onnxruntime 1.30 dies with SIGFPE in its 'all'-level layout
# optimizations; 'extended' reports the node. The shape probe (core/engine/probe.ts) now runs at
# 'extended' and fails cleanly first.
save('zero-height-after-pooling', [
    helper.make_node('Conv', ['image', 'w0'], ['a'], name='conv0', pads=[1, 1, 1, 1]),
    helper.make_node('Relu', ['a'], ['r'], name='relu0'),
    helper.make_node('MaxPool', ['r'], ['p1'], name='pool1', kernel_shape=[3, 3], strides=[2, 2], ceil_mode=1),
    helper.make_node('MaxPool', ['p1'], ['p2'], name='pool2', kernel_shape=[3, 3], strides=[2, 2], ceil_mode=1),
    helper.make_node('Conv', ['p2', 'w1', 'b1'], ['c'], name='squeeze'),
    helper.make_node('Relu', ['c'], ['r2'], name='relu1'),
    helper.make_node('GlobalAveragePool', ['r2'], ['g'], name='gap'),
    helper.make_node('Flatten', ['g'], ['logits'], name='flat'),
], {'w0': rng.standard_normal((16, 3, 3, 3)).astype(np.float32), 'w1': rng.standard_normal((4, 16, 1, 1)).astype(np.float32),
    'b1': np.zeros(4, np.float32)}, [1, 4], """
fuzz seed 300285: a tensor of height 0 after pooling crashed onnxruntime 1.30 with SIGFPE ('all' optimizations).
Expected now: a UserError from the shape probe naming the node.
""", in_dims=(1, 3, 3, 66))
