import { PROTOCOL_VERSION, topicFor, type Command, type Stored } from '../server/contracts/protocol';
import type { BoardDriver } from './types';

/** Runnel's own board protocol, version 1 (docs/protocol.md). */
export const runnelV1Driver: BoardDriver = {
  name: 'runnel-v1',
  commandTopic: (serial) => topicFor(serial, 'cmd'),
  encodeCommand: (cmd: Command) => Buffer.from(JSON.stringify(cmd)),
  receiptTopic: (serial) => topicFor(serial, 'stored'),
  encodeReceipt: (seqs) => Buffer.from(JSON.stringify({ v: PROTOCOL_VERSION, seqs } satisfies Stored)),
};
