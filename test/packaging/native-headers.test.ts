/**
 * The readers scripts/package.mjs checks every .vsix with: binary headers and imported
 * libraries, on the binaries that onnxruntime-node 1.30 ships for every platform in its npm
 * tarball (node_modules/onnxruntime-node/bin/napi-v6/<os>/<cpu>/), whose folder names say
 * which machine each was built for; and the zip reader against an archive made by vsce.
 */
import { strict as assert } from 'node:assert';
import { existsSync, readFileSync } from 'node:fs';
import * as path from 'node:path';

const ROOT = path.resolve(__dirname, '..', '..');
const BIN = path.join(ROOT, 'node_modules', 'onnxruntime-node', 'bin', 'napi-v6');

interface NativeEntry { name: string; bytes: Buffer }
interface Targets {
  nativeHeader(buf: Buffer): string;
  nativeDependencies(buf: Buffer): { needed: string[]; delayed: string[] };
  unresolvedLibraries(natives: NativeEntry[], os: string): { missing: string[]; delayedAbsent: string[] };
  zipEntries(file: string): { name: string; read(): Buffer }[];
}
const load = async (): Promise<Targets> => (await import(path.join(ROOT, 'scripts', 'platform-targets.mjs'))) as Targets;

describe('packaging: native binary headers and imports', () => {
  it('names the machine of each onnxruntime binary as its folder says (ELF e_machine, Mach-O cputype, PE machine)', async () => {
    const { nativeHeader } = await load();
    const expected: Record<string, string> = {
      'linux/x64': 'ELF x86-64', 'linux/arm64': 'ELF aarch64', 'darwin/arm64': 'Mach-O arm64',
      'win32/x64': 'PE32+ x64', 'win32/arm64': 'PE32+ ARM64',
    };
    for (const [dir, machine] of Object.entries(expected)) {
      const file = path.join(BIN, dir, 'onnxruntime_binding.node');
      assert.equal(nativeHeader(readFileSync(file)), machine, file);
    }
    assert.match(nativeHeader(Buffer.from('#!/bin/sh\n')), /^unknown/);
  });

  it('reads the libraries each binding imports: its own runtime library first-hand, DirectML only as a delay-load', async () => {
    const { nativeDependencies } = await load();
    const deps = (dir: string, file: string) => nativeDependencies(readFileSync(path.join(BIN, dir, file)));
    assert.ok(deps('linux/x64', 'onnxruntime_binding.node').needed.includes('libonnxruntime.so.1'));
    assert.ok(deps('linux/arm64', 'onnxruntime_binding.node').needed.includes('libonnxruntime.so.1'));
    assert.ok(deps('darwin/arm64', 'onnxruntime_binding.node').needed.includes('@rpath/libonnxruntime.1.dylib'));
    for (const dir of ['win32/x64', 'win32/arm64']) {
      assert.ok(deps(dir, 'onnxruntime_binding.node').needed.includes('onnxruntime.dll'), dir);
      const ort = deps(dir, 'onnxruntime.dll');
      assert.ok(!ort.needed.some((d) => /directml/i.test(d)), `${dir}: DirectML is not a load-time import`);
      assert.ok(ort.delayed.includes('DirectML.dll'), `${dir}: DirectML is a delay-load import`);
    }
  });

  it('accepts a package whose imports are all packed or system, and names the one that is not', async () => {
    const { unresolvedLibraries } = await load();
    const entry = (dir: string, file: string) => ({ name: `extension/x/${file}`, bytes: readFileSync(path.join(BIN, dir, file)) });
    const both = [entry('win32/x64', 'onnxruntime_binding.node'), entry('win32/x64', 'onnxruntime.dll')];
    assert.deepEqual(unresolvedLibraries(both, 'win32'), { missing: [], delayedAbsent: ['DirectML.dll'] });
    assert.deepEqual(unresolvedLibraries([both[0]], 'win32').missing, ['extension/x/onnxruntime_binding.node needs onnxruntime.dll']);
    assert.deepEqual(unresolvedLibraries([entry('linux/arm64', 'onnxruntime_binding.node')], 'linux').missing,
      ['extension/x/onnxruntime_binding.node needs libonnxruntime.so.1']);
  });

  it('the wine stand-in DLL is a PE32+ x64 image whose one export forwards to ADVAPI32', async () => {
    const { nativeHeader } = await load();
    const { forwarderDll } = (await import(path.join(ROOT, 'scripts', 'package-wine-shim.mjs'))) as { forwarderDll(d: string, e: string, t: string): Buffer };
    const dll = forwarderDll('bcryptprimitives.dll', 'ProcessPrng', 'ADVAPI32.SystemFunction036');
    assert.equal(nativeHeader(dll), 'PE32+ x64');
    // Export directory (PE Format, .edata): data directory 0, name pointer table, address table.
    const opt = dll.readUInt32LE(0x3c) + 24;
    const exportRva = dll.readUInt32LE(opt + 112), exportSize = dll.readUInt32LE(opt + 116);
    const toFile = (rva: number) => rva - 0x1000 + 0x200;
    const cstr = (rva: number) => dll.toString('latin1', toFile(rva), dll.indexOf(0, toFile(rva)));
    const dir = toFile(exportRva);
    assert.equal(cstr(dll.readUInt32LE(dir + 12)), 'bcryptprimitives.dll');
    assert.equal(cstr(dll.readUInt32LE(toFile(dll.readUInt32LE(dir + 32)))), 'ProcessPrng');
    const fn = dll.readUInt32LE(toFile(dll.readUInt32LE(dir + 28)));
    assert.ok(fn >= exportRva && fn < exportRva + exportSize, 'the function address lies inside the export directory: a forwarder');
    assert.equal(cstr(fn), 'ADVAPI32.SystemFunction036');
  });

  it('reads a .vsix made by vsce back: names and inflated contents', async function () {
    const { name, version } = JSON.parse(readFileSync(path.join(ROOT, 'package.json'), 'utf8'));
    const vsix = path.join(ROOT, 'dist-vsix', `${name}-${version}-linux-x64.vsix`);
    if (!existsSync(vsix)) this.skip(); // made by `npm run package`; not part of npm test's build
    const { zipEntries } = await load();
    const manifest = zipEntries(vsix).find((e) => e.name === 'extension/package.json');
    assert.ok(manifest, 'extension/package.json is in the archive');
    assert.equal(JSON.parse(manifest.read().toString('utf8')).name, name);
  });
});
