import { describe, expect, it } from 'vitest';
import { clusterNames, fnv1a32, frameSubject, nameToken, outSubject, partitionFilter, partitionOf, streamOfToken } from '../names.js';

const utf8 = (s: string) => new TextEncoder().encode(s);

describe('cluster names', () => {
  it('hashes with 32-bit FNV-1a', () => {
    // Test vectors of the FNV reference suite (Fowler, Noll, Vo; IETF draft-eastlake-fnv), from memory:
    // the empty string hashes to the offset basis itself.
    expect(fnv1a32(utf8(''))).toBe(0x811c9dc5);
    expect(fnv1a32(utf8('a'))).toBe(0xe40c292c);
    expect(fnv1a32(utf8('foobar'))).toBe(0xbf9cf968);
  });

  it('maps a stream to its partition by the documented rule, the same for every node', () => {
    // docs/cluster.md: partition = FNV-1a-32(UTF-8 name) mod P. Closed form on the vectors above.
    expect(partitionOf('a', 32)).toBe(0xe40c292c % 32);
    expect(partitionOf('foobar', 32)).toBe(0xbf9cf968 % 32);
    const n = clusterNames('sparsewire', 32);
    expect(frameSubject(n, 'foobar')).toBe(`sparsewire.frames.${0xbf9cf968 % 32}.foobar`);
    // Each partition's frames match exactly one consumer filter (one wildcard token: the name token).
    expect(partitionFilter(n, 8)).toBe('sparsewire.frames.8.*');
  });

  it('turns dotted stream names into one subject token and back', () => {
    const n = clusterNames('plant-7', 16);
    expect(nameToken('stand-3.vib.x')).toBe('stand-3=vib=x');
    expect(streamOfToken(nameToken('stand-3.vib.x'))).toBe('stand-3.vib.x');
    expect(outSubject(n, 'a.b')).toBe('plant-7.out.a=b');
    expect(frameSubject(n, 'a.b').split('.')).toHaveLength(4);
    expect(n.frameLog).toBe('PLANT_7_FRAMES');
  });

  it('names a bad prefix or partition count', () => {
    expect(() => clusterNames('a.b', 32)).toThrow('cluster prefix must contain only');
    expect(() => clusterNames('x', 0)).toThrow('partitions must be an integer in [1, 4096], got 0');
  });
});
