import { describe, expect, it } from 'vitest';
import { ManualClock } from '../../../simulator/clock';
import { RelayBank } from '../../../simulator/relays';

function bank(stuck: number[] = []) {
  const clock = new ManualClock(10_000);
  const fired: number[] = [];
  const b = new RelayBank(4, clock, (r) => stuck.includes(r), (r) => {
    fired.push(r);
    b.close(r, 'failsafe', b.cmdIdOf(r));
  });
  return { clock, b, fired };
}

describe('relay bank', () => {
  it('fires the failsafe exactly when the maximum on-time has passed', () => {
    const { clock, b, fired } = bank();
    b.open(2, 5000, 'cmd-000001');
    clock.advance(4999);
    expect(b.isOpen(2)).toBe(true);
    clock.advance(1);
    expect(fired).toEqual([2]);
    expect(b.isOpen(2)).toBe(false);
  });

  it('re-arms the failsafe when an open relay is opened again, without a second energise', () => {
    const { clock, b } = bank();
    expect(b.open(1, 5000, 'cmd-000001')).toBe(true);
    clock.advance(4000);
    expect(b.open(1, 5000, 'cmd-000002')).toBe(false);
    clock.advance(4000);
    expect(b.isOpen(1)).toBe(true);
    expect(b.snapshot()[0]).toMatchObject({ open: true, sinceMs: 10_000, closesAtMs: 19_000, cmdId: 'cmd-000002' });
    clock.advance(1000);
    expect(b.isOpen(1)).toBe(false);
    expect(b.energizeLog).toEqual([{ relay: 1, atMs: 10_000 }]);
  });

  it('logs every off-to-on moment in clock time', () => {
    const { clock, b } = bank();
    b.open(1, 60_000, null);
    clock.advance(500);
    b.open(3, 60_000, null);
    b.close(1, 'command', null);
    clock.advance(250);
    b.open(1, 60_000, null);
    expect(b.energizeLog).toEqual([{ relay: 1, atMs: 10_000 }, { relay: 3, atMs: 10_500 }, { relay: 1, atMs: 10_750 }]);
  });

  it('cancels the failsafe when a relay is closed in time', () => {
    const { clock, b, fired } = bank();
    b.open(4, 1000, null);
    expect(b.close(4, 'command', 'cmd-000003')).toBe('closed');
    clock.advance(5000);
    expect(fired).toEqual([]);
    expect(b.close(4, 'command', null)).toBe('already_closed');
  });

  it('keeps a stuck valve open on close and on failsafe, remembering the refused close', () => {
    const { clock, b, fired } = bank([3]);
    b.open(3, 1000, 'cmd-000004');
    expect(b.close(3, 'command', 'cmd-000005')).toBe('stuck');
    expect(b.isOpen(3)).toBe(true);
    expect(b.takePendingClose(3)).toEqual({ source: 'command', cmdId: 'cmd-000005' });
    expect(b.takePendingClose(3)).toBeNull();
    b.open(3, 1000, 'cmd-000006');
    clock.advance(1000);
    expect(fired).toEqual([3]);
    expect(b.isOpen(3)).toBe(true);
    expect(b.openRelays()).toEqual([3]);
  });
});
