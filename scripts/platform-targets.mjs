// The desktop platforms the extension is packed for, and the readers that check a packed
// archive: zip entries (PKWARE APPNOTE 6.3.10, §4.3), native binary headers and the shared
// libraries each binary names (ELF: System V gABI ch. 4–5; Mach-O: <mach-o/loader.h>;
// PE: Microsoft "PE Format" specification). Used by scripts/package.mjs and test/packaging/.
import { readFileSync } from 'node:fs';
import { inflateRawSync } from 'node:zlib';

// Per target: the os/cpu npm installs for, the machine every native binary must be built
// for, the onnxruntime-node files it ships (bin/napi-v6/<os>/<cpu>/), the sharp packages, and
// the sharp files that must be there (relative to node_modules/@img/).
// onnxruntime-node 1.30 ships no darwin/x64 binaries, so there is no Intel Mac target.
// DirectML.dll, dxcompiler.dll and dxil.dll (the GPU provider on Windows, 38 MB) stay out:
// onnxruntime.dll names DirectML.dll (and d3d12.dll, dxgi.dll) only in its delay-load import
// table, so Windows loads it at the first call into the DirectML provider, which the engine
// never asks for (CPU provider only); the binding itself imports only onnxruntime.dll and the
// C runtime. scripts/package.mjs reads both import tables of every shipped binary on every
// pack, and the win32-x64 run under wine (scripts/run-foreign.sh) loads the binding without them.
export const TARGETS = {
  'linux-x64': {
    os: 'linux', cpu: 'x64', libc: 'glibc', machine: 'ELF x86-64',
    ortFiles: ['onnxruntime_binding.node', 'libonnxruntime.so.1'],
    sharp: ['sharp-linux-x64', 'sharp-libvips-linux-x64'],
    sharpRequired: ['sharp-linux-x64/package.json', 'sharp-linux-x64/lib/sharp-linux-x64.node', 'sharp-libvips-linux-x64/package.json'],
  },
  'linux-arm64': {
    os: 'linux', cpu: 'arm64', libc: 'glibc', machine: 'ELF aarch64',
    ortFiles: ['onnxruntime_binding.node', 'libonnxruntime.so.1'],
    sharp: ['sharp-linux-arm64', 'sharp-libvips-linux-arm64'],
    sharpRequired: ['sharp-linux-arm64/package.json', 'sharp-linux-arm64/lib/sharp-linux-arm64.node', 'sharp-libvips-linux-arm64/package.json'],
  },
  'darwin-arm64': {
    os: 'darwin', cpu: 'arm64', machine: 'Mach-O arm64',
    // The package carries the library twice (a versioned name and the name the binding
    // loads, @rpath/libonnxruntime.1.dylib); only the loaded one is shipped.
    ortFiles: ['onnxruntime_binding.node', 'libonnxruntime.1.dylib'],
    sharp: ['sharp-darwin-arm64', 'sharp-libvips-darwin-arm64'],
    sharpRequired: ['sharp-darwin-arm64/package.json', 'sharp-darwin-arm64/lib/sharp-darwin-arm64.node', 'sharp-libvips-darwin-arm64/package.json'],
  },
  'win32-x64': {
    os: 'win32', cpu: 'x64', machine: 'PE32+ x64',
    ortFiles: ['onnxruntime_binding.node', 'onnxruntime.dll'],
    // On Windows libvips ships inside the sharp package itself.
    sharp: ['sharp-win32-x64'],
    sharpRequired: ['sharp-win32-x64/package.json', 'sharp-win32-x64/lib/sharp-win32-x64.node'],
  },
  'win32-arm64': {
    os: 'win32', cpu: 'arm64', machine: 'PE32+ ARM64',
    ortFiles: ['onnxruntime_binding.node', 'onnxruntime.dll'],
    sharp: ['sharp-win32-arm64'],
    sharpRequired: ['sharp-win32-arm64/package.json', 'sharp-win32-arm64/lib/sharp-win32-arm64.node'],
  },
};

export const NATIVE_FILE = /\.(node|dll|dylib|so(\.\d+)*)$/;

// The entries of a zip archive from its central directory, each with a read() that returns
// the stored or deflated bytes (APPNOTE §4.3.7 local header, §4.3.12 central header,
// §4.3.16 end of central directory; methods 0 stored and 8 deflate).
export function zipEntries(file) {
  const zip = readFileSync(file);
  const eocd = zip.lastIndexOf(Buffer.from([0x50, 0x4b, 0x05, 0x06]));
  if (eocd < 0) throw new Error(`${file} is not a zip archive (no end-of-central-directory record)`);
  const count = zip.readUInt16LE(eocd + 10);
  let at = zip.readUInt32LE(eocd + 16);
  if (count === 0xffff || at === 0xffffffff) throw new Error(`${file} is a zip64 archive, which this reader does not handle`);
  const entries = [];
  for (let i = 0; i < count; i++) {
    if (zip.readUInt32LE(at) !== 0x02014b50) throw new Error(`${file}: bad central directory entry ${i}`);
    const method = zip.readUInt16LE(at + 10);
    const compressedSize = zip.readUInt32LE(at + 20), size = zip.readUInt32LE(at + 24);
    const nameLength = zip.readUInt16LE(at + 28), extraLength = zip.readUInt16LE(at + 30), commentLength = zip.readUInt16LE(at + 32);
    const localHeader = zip.readUInt32LE(at + 42);
    const name = zip.toString('utf8', at + 46, at + 46 + nameLength);
    entries.push({
      name, size, compressedSize,
      read() {
        if (zip.readUInt32LE(localHeader) !== 0x04034b50) throw new Error(`${file}: bad local header for ${name}`);
        const start = localHeader + 30 + zip.readUInt16LE(localHeader + 26) + zip.readUInt16LE(localHeader + 28);
        const raw = zip.subarray(start, start + compressedSize);
        if (method === 0) return raw;
        if (method === 8) return inflateRawSync(raw);
        throw new Error(`${file}: ${name} uses zip method ${method}`);
      },
    });
    at += 46 + nameLength + extraLength + commentLength;
  }
  return entries;
}

// ELF e_machine values (gABI, "Machine" table): 62 EM_X86_64, 183 EM_AARCH64, 40 EM_ARM.
const ELF_MACHINES = { 3: 'i386', 40: 'arm', 62: 'x86-64', 183: 'aarch64' };
// Mach-O cputype (<mach/machine.h>): CPU_TYPE_X86_64 = 0x01000007, CPU_TYPE_ARM64 = 0x0100000c.
const MACHO_CPUS = { 0x01000007: 'x86_64', 0x0100000c: 'arm64', 7: 'i386', 12: 'arm' };
// PE COFF machine (PE Format, "Machine Types"): 0x8664 AMD64, 0xaa64 ARM64, 0xa641 ARM64EC, 0x14c I386.
const PE_MACHINES = { 0x8664: 'x64', 0xaa64: 'ARM64', 0xa641: 'ARM64EC', 0x14c: 'x86', 0x1c4: 'ARMNT' };

// One line naming the format and machine of a native binary, e.g. 'ELF aarch64',
// 'Mach-O arm64', 'PE32+ x64'; 'unknown …' for anything else.
export function nativeHeader(buf) {
  if (buf.length >= 20 && buf.readUInt32BE(0) === 0x7f454c46) {
    const little = buf[5] === 1;
    const machine = little ? buf.readUInt16LE(18) : buf.readUInt16BE(18);
    return `ELF${buf[4] === 1 ? '32' : ''} ${ELF_MACHINES[machine] ?? `machine ${machine}`}`;
  }
  if (buf.length >= 8 && buf.readUInt32LE(0) === 0xfeedfacf) {
    const cpu = buf.readUInt32LE(4);
    return `Mach-O ${MACHO_CPUS[cpu] ?? `cputype 0x${cpu.toString(16)}`}`;
  }
  if (buf.length >= 8 && buf.readUInt32BE(0) === 0xcafebabe) {
    const n = buf.readUInt32BE(4), cpus = [];
    for (let i = 0; i < n; i++) cpus.push(MACHO_CPUS[buf.readUInt32BE(8 + 20 * i)] ?? 'other');
    return `Mach-O universal ${cpus.join('+')}`;
  }
  if (buf.length >= 0x40 && buf.toString('latin1', 0, 2) === 'MZ') {
    const pe = buf.readUInt32LE(0x3c);
    if (pe + 26 <= buf.length && buf.readUInt32LE(pe) === 0x00004550) {
      const machine = buf.readUInt16LE(pe + 4);
      const magic = buf.readUInt16LE(pe + 24);
      return `${magic === 0x20b ? 'PE32+' : 'PE32'} ${PE_MACHINES[machine] ?? `machine 0x${machine.toString(16)}`}`;
    }
  }
  return `unknown (starts ${buf.subarray(0, 4).toString('hex')})`;
}

function cString(buf, at) {
  const end = buf.indexOf(0, at);
  return buf.toString('latin1', at, end < 0 ? buf.length : end);
}

// The shared libraries a native binary asks the loader for:
// ELF DT_NEEDED entries of the dynamic section (64-bit little-endian only);
// Mach-O LC_LOAD_DYLIB / LC_LOAD_WEAK_DYLIB / LC_REEXPORT_DYLIB names (64-bit thin only);
// PE import directory and delay-import directory DLL names (data directories 1 and 13).
// Returns { needed: string[], delayed: string[] }.
export function nativeDependencies(buf) {
  const header = nativeHeader(buf);
  if (header.startsWith('ELF ')) return elfNeeded(buf);
  if (header.startsWith('Mach-O ') && !header.includes('universal')) return machoDylibs(buf);
  if (header.startsWith('PE32+ ')) return peImports(buf);
  throw new Error(`cannot read the dependencies of a binary whose header is '${header}'`);
}

function elfNeeded(buf) {
  if (buf[4] !== 2 || buf[5] !== 1) throw new Error('only 64-bit little-endian ELF is read');
  const shoff = Number(buf.readBigUInt64LE(0x28));
  const shentsize = buf.readUInt16LE(0x3a), shnum = buf.readUInt16LE(0x3c);
  const sections = [];
  for (let i = 0; i < shnum; i++) {
    const at = shoff + i * shentsize;
    sections.push({
      type: buf.readUInt32LE(at + 4), offset: Number(buf.readBigUInt64LE(at + 0x18)),
      size: Number(buf.readBigUInt64LE(at + 0x20)), link: buf.readUInt32LE(at + 0x28),
    });
  }
  const dynamic = sections.find((s) => s.type === 6); // SHT_DYNAMIC
  if (!dynamic) return { needed: [], delayed: [] };
  const strtab = sections[dynamic.link];
  const needed = [];
  for (let at = dynamic.offset; at + 16 <= dynamic.offset + dynamic.size; at += 16) {
    const tag = Number(buf.readBigInt64LE(at));
    if (tag === 0) break; // DT_NULL
    if (tag === 1) needed.push(cString(buf, strtab.offset + Number(buf.readBigUInt64LE(at + 8)))); // DT_NEEDED
  }
  return { needed, delayed: [] };
}

function machoDylibs(buf) {
  const ncmds = buf.readUInt32LE(16);
  const needed = [], delayed = [];
  let at = 32; // sizeof(mach_header_64)
  for (let i = 0; i < ncmds; i++) {
    const cmd = buf.readUInt32LE(at), size = buf.readUInt32LE(at + 4);
    // LC_LOAD_DYLIB 0xc, LC_LOAD_WEAK_DYLIB 0x80000018, LC_REEXPORT_DYLIB 0x8000001f
    if (cmd === 0xc || cmd === 0x8000001f) needed.push(cString(buf, at + buf.readUInt32LE(at + 8)));
    if (cmd === 0x80000018) delayed.push(cString(buf, at + buf.readUInt32LE(at + 8)));
    at += size;
  }
  return { needed, delayed };
}

function peImports(buf) {
  const pe = buf.readUInt32LE(0x3c);
  const sectionCount = buf.readUInt16LE(pe + 6);
  const optionalSize = buf.readUInt16LE(pe + 20);
  const optional = pe + 24;
  const sectionTable = optional + optionalSize;
  const sections = [];
  for (let i = 0; i < sectionCount; i++) {
    const s = sectionTable + 40 * i;
    sections.push({ va: buf.readUInt32LE(s + 12), vsize: buf.readUInt32LE(s + 8), raw: buf.readUInt32LE(s + 20), rawSize: buf.readUInt32LE(s + 16) });
  }
  const fileOffset = (rva) => {
    const s = sections.find((x) => rva >= x.va && rva < x.va + Math.max(x.vsize, x.rawSize));
    if (!s) throw new Error(`PE: RVA 0x${rva.toString(16)} lies in no section`);
    return rva - s.va + s.raw;
  };
  const directory = (index) => ({ rva: buf.readUInt32LE(optional + 112 + 8 * index), size: buf.readUInt32LE(optional + 116 + 8 * index) });
  const names = (index, entrySize, nameField) => {
    const dir = directory(index);
    const out = [];
    if (!dir.rva) return out;
    for (let at = fileOffset(dir.rva); ; at += entrySize) {
      const nameRva = buf.readUInt32LE(at + nameField);
      if (!nameRva) break;
      out.push(cString(buf, fileOffset(nameRva)));
    }
    return out;
  };
  // IMAGE_IMPORT_DESCRIPTOR: 20 bytes, Name at +12; delay-load descriptor: 32 bytes, DllNameRVA at +4.
  return { needed: names(1, 20, 12), delayed: names(13, 32, 4) };
}

// Libraries the operating system (or, on Windows, the C runtime every Windows 10/11 machine
// and node.exe's own process already have) provides; any other library a shipped binary names
// must be inside the package. The lists are the names these binaries were seen to import.
const SYSTEM_LIBRARIES = {
  linux: [/^(libc|libm|libdl|librt|libpthread|libstdc\+\+|libgcc_s|libresolv|libz)\.so\.\d+$/, /^ld-linux-(x86-64|aarch64)\.so\.\d$/],
  darwin: [/^\/(System\/Library|usr\/lib)\//],
  win32: [/^api-ms-win-/i, /^(kernel32|user32|shell32|advapi32|ole32|oleaut32|setupapi|dbghelp|gdi32|ws2_32|bcrypt|bcryptprimitives|dnsapi|crypt32|shlwapi|version|winmm|ntdll|rpcrt4|userenv|iphlpapi|secur32|d3d12|dxgi|node)\.(dll|exe)$/i,
    /^(msvcp140(_1|_2|_atomic_wait|_codecvt_ids)?|vcruntime140(_1)?)\.dll$/i],
};

// Every library the native binaries of an archive name, resolved: 'system', 'packaged' (a
// file of that name is in the archive), or missing. Returns the missing ones, and the
// delay-load imports that are not shipped (loaded only when code that needs them runs).
export function unresolvedLibraries(natives, os) {
  const base = (n) => n.split('/').pop().toLowerCase();
  const shipped = new Set(natives.map((e) => base(e.name)));
  const system = SYSTEM_LIBRARIES[os];
  const missing = [], delayedAbsent = new Set();
  for (const e of natives) {
    const { needed, delayed } = nativeDependencies(e.bytes);
    for (const lib of needed) {
      if (!system.some((re) => re.test(lib)) && !shipped.has(base(lib))) missing.push(`${e.name} needs ${lib}`);
    }
    for (const lib of delayed) if (!system.some((re) => re.test(lib)) && !shipped.has(base(lib))) delayedAbsent.add(lib);
  }
  return { missing, delayedAbsent: [...delayedAbsent] };
}
