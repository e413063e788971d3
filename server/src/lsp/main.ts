// Entry point of the language server (bundled to dist/server.js): stdio by default, as editors start it.
import { createConnection, LSPErrorCodes, ProposedFeatures, type Message, type RequestMessage, type ResponseMessage } from 'vscode-languageserver/node';

function isRequest(m: Message): m is RequestMessage {
  return 'method' in m && 'id' in m && (m as RequestMessage).id !== undefined;
}
import { loadPythonParser } from '../engine/parser';
import { RULES } from '../../../rules/index';
import { RegwiseServer } from './server';

const transports = ['--stdio', '--node-ipc', '--socket', '--pipe', '--clientProcessId'];
const named = process.argv.slice(2).some((a) => transports.some((t) => a === t || a.startsWith(`${t}=`)));
// a request cancelled while still queued is answered at once and never runs
const strategy = {
  cancelUndispatched: (message: Message): ResponseMessage | undefined =>
    isRequest(message) ? { jsonrpc: '2.0', id: message.id, error: { code: LSPErrorCodes.RequestCancelled, message: 'cancelled before it started' } } : undefined,
};
const conn = named ? createConnection(ProposedFeatures.all, strategy) : createConnection(ProposedFeatures.all, process.stdin, process.stdout, strategy);

// bad input must never take the server down: log and keep serving
process.on('uncaughtException', (err) => conn.console.error(`[regwise] uncaught: ${err.stack ?? err.message}`));
process.on('unhandledRejection', (err) => conn.console.error(`[regwise] unhandled rejection: ${err instanceof Error ? err.stack ?? err.message : String(err)}`));

// the grammar loads asynchronously; messages wait in the connection until the handlers are wired
void loadPythonParser().then(
  (parser) => {
    new RegwiseServer(conn, parser, RULES);
    conn.listen();
  },
  (err: unknown) => {
    process.stderr.write(`regwise: cannot load the Python grammar: ${err instanceof Error ? err.message : String(err)}\n`);
    process.exit(1);
  },
);
