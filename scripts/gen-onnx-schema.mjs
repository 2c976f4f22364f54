// Regenerates core/model/schema/onnx-schema.json from the official onnx.proto (Apache-2.0,
// copied from the onnx Python package). Run: node scripts/gen-onnx-schema.mjs
import { readFileSync, writeFileSync } from 'node:fs';
import protobuf from 'protobufjs';
const here = new URL('../core/model/schema/', import.meta.url);
const proto = readFileSync(new URL('onnx.proto', here), 'utf8');
const root = protobuf.parse(proto, { keepCase: true }).root;
writeFileSync(new URL('onnx-schema.json', here), JSON.stringify(root.toJSON()) + '\n');
console.log('wrote core/model/schema/onnx-schema.json');
