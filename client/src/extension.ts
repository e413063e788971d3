// The VS Code extension: starts the Regwise language server, shows its state and findings count, and adds the commands.
/// <reference types="vscode" />
import * as fs from 'node:fs';
import * as path from 'node:path';
import * as vscode from 'vscode';
import { LanguageClient, State, TransportKind, type LanguageClientOptions, type ServerOptions } from 'vscode-languageclient/node';

let client: LanguageClient | undefined;
let status: vscode.StatusBarItem | undefined;

interface RuleInfo {
  id: string;
  title: string;
  level: string;
  summary: string;
}

function findingsCount(): number {
  let n = 0;
  for (const [, diags] of vscode.languages.getDiagnostics()) for (const d of diags) if (d.source === 'regwise') n++;
  return n;
}

function updateStatus(): void {
  if (!status || !client) return;
  const state = client.state === State.Running ? 'running' : client.state === State.Starting ? 'starting' : 'stopped';
  const enabled = vscode.workspace.getConfiguration('regwise').get<boolean>('enabled', true);
  const n = findingsCount();
  const icon = !enabled ? '$(circle-slash)' : state === 'running' ? (n ? '$(warning)' : '$(check)') : state === 'starting' ? '$(sync~spin)' : '$(error)';
  status.text = `${icon} Regwise${state === 'running' && enabled ? `: ${n}` : ''}`;
  status.tooltip = `Regwise language server: ${enabled ? state : 'disabled in settings'}\n${n} finding${n === 1 ? '' : 's'} in the workspace\nClick to open the Problems panel`;
}

/** The document a command acts on: the active editor's (a notebook cell counts as its notebook's). */
function activeUri(): string | undefined {
  return vscode.window.activeTextEditor?.document.uri.toString();
}

async function applySafeFixes(): Promise<void> {
  const uri = activeUri();
  if (!client || !uri) return void vscode.window.showInformationMessage('Regwise: open a Python file or notebook first.');
  const edit = await client.sendRequest<unknown>('regwise/applySafeFixes', { uri });
  if (!edit) return void vscode.window.showInformationMessage('Regwise: no safe fixes to apply in this file.');
  const converted = await client.protocol2CodeConverter.asWorkspaceEdit(edit as Parameters<typeof client.protocol2CodeConverter.asWorkspaceEdit>[0]);
  if (converted) await vscode.workspace.applyEdit(converted);
}

async function scanWorkspace(): Promise<void> {
  if (!client) return;
  const r = await vscode.window.withProgress({ location: vscode.ProgressLocation.Window, title: 'Regwise: scanning the workspace' }, () =>
    client!.sendRequest<{ files: number; findings: number }>('regwise/scanWorkspace'),
  );
  if (r) void vscode.window.showInformationMessage(`Regwise: ${r.findings} finding${r.findings === 1 ? '' : 's'} in ${r.files} file${r.files === 1 ? '' : 's'}.`);
}

async function showModelStructure(): Promise<void> {
  const uri = activeUri();
  if (!client || !uri) return void vscode.window.showInformationMessage('Regwise: open a Python file first.');
  const text = await client.sendRequest<string>('regwise/modelStructure', { uri });
  const doc = await vscode.workspace.openTextDocument({ content: text, language: 'plaintext' });
  await vscode.window.showTextDocument(doc, { preview: true, viewColumn: vscode.ViewColumn.Beside });
}

async function explainRule(context: vscode.ExtensionContext, id?: unknown): Promise<void> {
  if (!client) return;
  const rules = await client.sendRequest<RuleInfo[]>('regwise/rules');
  let rule = typeof id === 'string' ? rules.find((r) => r.id === id) : undefined;
  if (!rule) {
    const pick = await vscode.window.showQuickPick(rules.map((r) => ({ label: r.id, description: r.title, detail: r.summary, rule: r })), { placeHolder: 'Which rule?' });
    rule = pick?.rule;
  }
  if (!rule) return;
  const doc = context.asAbsolutePath(path.join('dist', 'rules', `${rule.id}.md`));
  if (fs.existsSync(doc)) await vscode.commands.executeCommand('markdown.showPreview', vscode.Uri.file(doc));
  else void vscode.window.showInformationMessage(`${rule.id}: ${rule.title}. ${rule.summary}`, { modal: true });
}

export async function activate(context: vscode.ExtensionContext): Promise<void> {
  const output = vscode.window.createOutputChannel('Regwise');
  const module = context.asAbsolutePath(path.join('dist', 'server.js'));
  const serverOptions: ServerOptions = {
    run: { module, transport: TransportKind.ipc },
    debug: { module, transport: TransportKind.ipc, options: { execArgv: ['--nolazy', '--inspect=6011'] } },
  };
  const clientOptions: LanguageClientOptions = {
    // any scheme, so it also works in virtual workspaces; notebook cells are synchronised by the notebook feature
    documentSelector: [{ language: 'python' }],
    synchronize: { configurationSection: 'regwise' },
    outputChannel: output,
  };
  client = new LanguageClient('regwise', 'Regwise', serverOptions, clientOptions);

  status = vscode.window.createStatusBarItem('regwise.status', vscode.StatusBarAlignment.Left, 10);
  status.name = 'Regwise';
  status.command = 'workbench.actions.view.problems';
  status.show();
  context.subscriptions.push(
    status,
    output,
    client.onDidChangeState(updateStatus),
    vscode.languages.onDidChangeDiagnostics(updateStatus),
    vscode.workspace.onDidChangeConfiguration((e) => e.affectsConfiguration('regwise') && updateStatus()),
    vscode.commands.registerCommand('regwise.applySafeFixes', applySafeFixes),
    vscode.commands.registerCommand('regwise.scanWorkspace', scanWorkspace),
    vscode.commands.registerCommand('regwise.showModelStructure', showModelStructure),
    vscode.commands.registerCommand('regwise.explainRule', (id?: unknown) => explainRule(context, id)),
  );
  updateStatus();
  await client.start();
  updateStatus();
}

export async function deactivate(): Promise<void> {
  await client?.stop();
  client = undefined;
}
