import { topicFor, type Command } from '../server/contracts/protocol';
import type { BoardDriver } from './types';

/** Runnel's own board protocol, version 1 (docs/protocol.md). */
export const runnelV1Driver: BoardDriver = {
  name: 'runnel-v1',
  commandTopic: (serial) => topicFor(serial, 'cmd'),
  encodeCommand: (cmd: Command) => Buffer.from(JSON.stringify(cmd)),
};
