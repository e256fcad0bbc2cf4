/**
 * `npm run broker-user -- <command>`: users of the embedded broker for a plant's own publishers
 * (an edge gateway, a PLC's MQTT module), kept hashed in `<dataDir>/broker/users.json`
 * (./broker-users.ts). The running broker picks a change up at the next CONNECT.
 *
 *   add <name> --publish 'kb/#' [--publish …] [--subscribe …]   prints the new password once
 *   remove <name>
 *   list
 */
import { parseArgs } from 'node:util';
import { ZodError } from 'zod';
import { loadConfig } from '../config.ts';
import { addBrokerUser, readBrokerUsers, removeBrokerUser } from './broker-users.ts';

const usage = "usage: npm run broker-user -- add <name> --publish 'kb/#' [--subscribe FILTER] | remove <name> | list";

function main(): number {
  const { values, positionals } = parseArgs({
    allowPositionals: true,
    options: { publish: { type: 'string', multiple: true }, subscribe: { type: 'string', multiple: true }, help: { type: 'boolean', short: 'h' } },
  });
  const [cmd, name] = positionals;
  const { dataDir } = loadConfig();
  if (values.help || !cmd) {
    console.log(usage);
    return values.help ? 0 : 2;
  }
  if (cmd === 'list') {
    for (const u of readBrokerUsers(dataDir)) console.log(`${u.name}  publish: ${u.publish.join(' ') || '-'}  subscribe: ${u.subscribe.join(' ') || '-'}  (added ${u.created})`);
    return 0;
  }
  if (!name) {
    console.error(usage);
    return 2;
  }
  if (cmd === 'add') {
    const publish = values.publish ?? [];
    const subscribe = values.subscribe ?? [];
    if (publish.length + subscribe.length === 0) {
      console.error('give at least one --publish or --subscribe topic filter');
      return 2;
    }
    const password = addBrokerUser(dataDir, { name, publish, subscribe });
    console.log(`broker user "${name}" added; password (shown once): ${password}`);
    return 0;
  }
  if (cmd === 'remove') {
    if (removeBrokerUser(dataDir, name)) console.log(`broker user "${name}" removed`);
    else {
      console.error(`no broker user "${name}"`);
      return 1;
    }
    return 0;
  }
  console.error(usage);
  return 2;
}

try {
  process.exitCode = main();
} catch (err) {
  console.error(err instanceof ZodError ? err.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('\n') : (err as Error).message);
  process.exitCode = 1;
}
