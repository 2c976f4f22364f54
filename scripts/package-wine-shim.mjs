// Writes a stand-in bcryptprimitives.dll for wine 8.0 (Debian 12), which lacks that system DLL:
// the win32 libvips of sharp imports one function from it, ProcessPrng (random bytes; every
// Windows 10/11 has the DLL). The stand-in has no code: its only export forwards to
// ADVAPI32.SystemFunction036 (RtlGenRandom), which wine has, through the PE export forwarder
// mechanism (an export address inside the export directory names "DLL.Function"; Microsoft
// "PE Format", "Export Address Table"). It goes into the wine prefix's system32, never into the
// unpacked package, so the package is run as shipped.
//   node scripts/package-wine-shim.mjs <out.dll>
import { existsSync, writeFileSync } from 'node:fs';
import { pathToFileURL } from 'node:url';

export function forwarderDll(dllName, exportName, target) {
  const file = Buffer.alloc(0x400);
  // DOS header: 'MZ', e_lfanew at 0x3c.
  file.write('MZ', 0, 'latin1');
  file.writeUInt32LE(0x40, 0x3c);
  const pe = 0x40;
  file.writeUInt32LE(0x00004550, pe); // 'PE\0\0'
  // COFF header: AMD64, 1 section, optional header 240 bytes, EXECUTABLE_IMAGE | LARGE_ADDRESS_AWARE | DLL.
  file.writeUInt16LE(0x8664, pe + 4);
  file.writeUInt16LE(1, pe + 6);
  file.writeUInt16LE(240, pe + 20);
  file.writeUInt16LE(0x2022, pe + 22);
  const opt = pe + 24;
  file.writeUInt16LE(0x20b, opt); // PE32+
  file.writeUInt32LE(0x200, opt + 8); // SizeOfInitializedData
  file.writeUInt32LE(0, opt + 16); // AddressOfEntryPoint: none
  file.writeUInt32LE(0x1000, opt + 20); // BaseOfCode
  file.writeBigUInt64LE(0x180000000n, opt + 24); // ImageBase
  file.writeUInt32LE(0x1000, opt + 32); // SectionAlignment
  file.writeUInt32LE(0x200, opt + 36); // FileAlignment
  file.writeUInt16LE(6, opt + 40); // OS 6.0
  file.writeUInt16LE(6, opt + 48); // subsystem 6.0
  file.writeUInt32LE(0x2000, opt + 56); // SizeOfImage
  file.writeUInt32LE(0x200, opt + 60); // SizeOfHeaders
  file.writeUInt16LE(3, opt + 68); // IMAGE_SUBSYSTEM_WINDOWS_CUI
  file.writeBigUInt64LE(0x100000n, opt + 72);
  file.writeBigUInt64LE(0x1000n, opt + 80);
  file.writeBigUInt64LE(0x100000n, opt + 88);
  file.writeBigUInt64LE(0x1000n, opt + 96);
  file.writeUInt32LE(16, opt + 108); // NumberOfRvaAndSizes
  // The export data at RVA 0x1000 (file offset 0x200).
  const rva = 0x1000, raw = 0x200;
  const dir = 0, eat = 40, names = 44, ordinals = 48, strings = 52;
  let at = strings;
  const put = (s) => { const r = rva + at; file.write(`${s}\0`, raw + at, 'latin1'); at += s.length + 1; return r; };
  const nameRva = put(dllName), forwardRva = put(target), exportNameRva = put(exportName);
  const size = at;
  file.writeUInt32LE(nameRva, raw + dir + 12);
  file.writeUInt32LE(1, raw + dir + 16); // ordinal base
  file.writeUInt32LE(1, raw + dir + 20); // functions
  file.writeUInt32LE(1, raw + dir + 24); // names
  file.writeUInt32LE(rva + eat, raw + dir + 28);
  file.writeUInt32LE(rva + names, raw + dir + 32);
  file.writeUInt32LE(rva + ordinals, raw + dir + 36);
  file.writeUInt32LE(forwardRva, raw + eat); // inside the export directory: a forwarder
  file.writeUInt32LE(exportNameRva, raw + names);
  file.writeUInt16LE(0, raw + ordinals);
  file.writeUInt32LE(rva, opt + 112); // data directory 0: exports
  file.writeUInt32LE(size, opt + 116);
  // One section holding it: .edata, initialized data, readable.
  const sec = opt + 240;
  file.write('.edata', sec, 'latin1');
  file.writeUInt32LE(size, sec + 8);
  file.writeUInt32LE(rva, sec + 12);
  file.writeUInt32LE(0x200, sec + 16);
  file.writeUInt32LE(raw, sec + 20);
  file.writeUInt32LE(0x40000040, sec + 36);
  return file;
}

// Only when run as a program (importing it, as the tests do, writes nothing).
if (process.argv[1] && import.meta.url === pathToFileURL(process.argv[1]).href) {
  if (!process.argv[2]) { console.error('usage: node scripts/package-wine-shim.mjs <out.dll>'); process.exit(2); }
  if (existsSync(process.argv[2])) { console.error(`package-wine-shim: ${process.argv[2]} exists; not overwritten`); process.exit(2); }
  writeFileSync(process.argv[2], forwarderDll('bcryptprimitives.dll', 'ProcessPrng', 'ADVAPI32.SystemFunction036'));
}
