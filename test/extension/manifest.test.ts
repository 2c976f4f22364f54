/** package.json's contributes agree with what the extension registers and reads. */
import { strict as assert } from 'node:assert';
import { readFileSync } from 'node:fs';
import * as path from 'node:path';
import { COMMANDS, MODEL_EDITOR_VIEW_TYPE } from '../../extension/ids';
import { DEFAULT_SETTINGS, SETTINGS_SECTION } from '../../extension/settings';
import { IMAGE_EXTENSIONS } from '../../extension/images';

const pkg = JSON.parse(readFileSync(path.resolve(__dirname, '..', '..', 'package.json'), 'utf8'));

describe('extension manifest (package.json)', () => {
  it('contributes exactly the commands the extension registers, all under factfoil.', () => {
    const contributed = pkg.contributes.commands.map((c: { command: string }) => c.command).sort();
    assert.deepEqual(contributed, Object.values(COMMANDS).sort());
    for (const c of pkg.contributes.commands) assert.ok(c.title && c.command.startsWith('factfoil.'));
  });

  it('offers the explain command on every image type the extension decodes, in the Explorer', () => {
    const entry = pkg.contributes.menus['explorer/context'].find((m: { command: string }) => m.command === COMMANDS.explainImage);
    const re = new RegExp(/\/(.*)\/i$/.exec(entry.when.split('=~')[1].trim())![1], 'i');
    for (const ext of IMAGE_EXTENSIONS) assert.ok(re.test(`.${ext}`), `.${ext} matches the menu condition`);
    assert.ok(!re.test('.onnx') && !re.test('.pngx'));
  });

  it('registers the .onnx summary as the default editor of .onnx files (a click shows it, not binary text)', () => {
    assert.deepEqual(pkg.contributes.customEditors, [{ viewType: MODEL_EDITOR_VIEW_TYPE, displayName: 'Factfoil Model Summary', selector: [{ filenamePattern: '*.onnx' }], priority: 'default' }]);
  });

  it('declares every setting the extension reads, with the same defaults', () => {
    const props = pkg.contributes.configuration.properties;
    assert.deepEqual(Object.keys(props).sort(), Object.keys(DEFAULT_SETTINGS).map((k) => `${SETTINGS_SECTION}.${k}`).sort());
    for (const [k, v] of Object.entries(DEFAULT_SETTINGS)) assert.deepEqual(props[`${SETTINGS_SECTION}.${k}`].default, v, k);
  });

  it('declares limited support in untrusted workspaces, the dist entry point, and VS Code ^1.100.0', () => {
    assert.equal(pkg.capabilities.untrustedWorkspaces.supported, 'limited');
    assert.ok(pkg.capabilities.untrustedWorkspaces.description.length > 20);
    assert.equal(pkg.main, 'dist/extension.js');
    assert.equal(pkg.engines.vscode, '^1.100.0');
  });
});
