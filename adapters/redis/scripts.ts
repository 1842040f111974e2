// The Lua scripts of the Redis store. Each touches only keys of one hash tag (one session, or one
// user's session set), so it runs atomically on a single Redis and on Redis Cluster alike. They are
// sent by SHA (EVALSHA) and re-sent in full once when a server answers NOSCRIPT (e.g. after a restart).

import { createHash } from 'node:crypto';

export interface LuaScript {
  readonly name: string;
  readonly lua: string;
  readonly sha: string;
  readonly keys: number;
}

function script(name: string, keys: number, lua: string): LuaScript {
  return { name, keys, lua, sha: createHash('sha1').update(lua).digest('hex') };
}

/**
 * Load one session in one round trip.
 * KEYS: meta, slots. ARGV: cached "epoch:version" or ''.
 * Reply: nil (no session) | {v, ep} (cache still valid) | {v, ep, clock, turns, cap, dim, {field, payload, ...}}.
 */
export const LOAD = script('load', 2, `
local m = redis.call('HMGET', KEYS[1], 'v', 'ep', 'c', 'n', 'cap', 'dim')
if not m[1] then return false end
local ep = m[2] or ''
if ARGV[1] ~= '' and ARGV[1] == (ep .. ':' .. m[1]) then return {m[1], ep} end
return {m[1], ep, m[3] or '', m[4] or '', m[5] or '', m[6] or '', redis.call('HGETALL', KEYS[2])}
`);

/**
 * Commit one turn in one round trip: check the version, apply slot ops, store archive items, append
 * events (capped), bump the version, refresh the idle TTL.
 * KEYS: meta, slots, events, arch, uarch.
 * ARGV: 1 expected version, 2 commit id, 3 epoch for a new session, 4 clock, 5 turns, 6 capacity,
 *       7 dim, 8 user or '', 9 ttl seconds (0 = none), 10 max events, 11 new archive token,
 *       12 #ops, 13 #archive items, 14 #events, then #ops x (index, payload or '' to free),
 *       #archive x (id, payload), #events x json.
 * Reply: {1, version, epoch} applied | {2, version, epoch} this commit id was already applied |
 *        {0, version, epoch} version mismatch.
 */
export const COMMIT = script('commit', 5, `
local m = redis.call('HMGET', KEYS[1], 'v', 'ep', 'cap', 'dim', 'rc')
local v = tonumber(m[1] or '0')
local rc = m[5] or ''
if v ~= tonumber(ARGV[1]) then
  -- A resend of a commit that already landed (reply lost in a disconnect) is recognised by its id.
  local done = string.match(' ' .. rc, ' ' .. ARGV[2] .. '=(%d+)')
  if done then return {2, tonumber(done), m[2] or ''} end
  return {0, v, m[2] or ''}
end
local ep = m[2]
if not m[1] then
  -- A new session (or one erased or expired) starts from nothing, whatever a partial state left behind.
  ep = ARGV[3]
  redis.call('DEL', KEYS[2], KEYS[3], KEYS[4], KEYS[5])
end
local cap = tonumber(ARGV[6])
if m[1] then
  local oldcap = tonumber(m[3] or '0')
  if tonumber(m[4] or '0') ~= tonumber(ARGV[7]) then
    redis.call('DEL', KEYS[2])
  elseif oldcap > cap then
    for i = cap, oldcap - 1 do redis.call('HDEL', KEYS[2], tostring(i)) end
  end
end
local nops, narch, nev = tonumber(ARGV[12]), tonumber(ARGV[13]), tonumber(ARGV[14])
local a = 15
for i = 1, nops do
  if ARGV[a + 1] == '' then redis.call('HDEL', KEYS[2], ARGV[a]) else redis.call('HSET', KEYS[2], ARGV[a], ARGV[a + 1]) end
  a = a + 2
end
local fields = {'v', v + 1, 'ep', ep, 'c', ARGV[4], 'n', ARGV[5], 'cap', ARGV[6], 'dim', ARGV[7]}
if ARGV[8] ~= '' then
  fields[#fields + 1] = 'u'
  fields[#fields + 1] = ARGV[8]
end
if narch > 0 then
  local h, tf = KEYS[4], 'as'
  if ARGV[8] ~= '' then h, tf = KEYS[5], 'au' end
  for i = 1, narch do
    redis.call('HSET', h, ARGV[a], ARGV[a + 1])
    a = a + 2
  end
  fields[#fields + 1] = tf
  fields[#fields + 1] = ARGV[11]
end
local maxe = tonumber(ARGV[10])
for i = 1, nev do
  if maxe > 0 then redis.call('XADD', KEYS[3], 'MAXLEN', '~', maxe, '*', 'e', ARGV[a]) end
  a = a + 1
end
local keep, n = {ARGV[2] .. '=' .. (v + 1)}, 1
for tok in string.gmatch(rc, '%S+') do
  if n >= 8 then break end
  n = n + 1
  keep[n] = tok
end
fields[#fields + 1] = 'rc'
fields[#fields + 1] = table.concat(keep, ' ')
redis.call('HSET', KEYS[1], unpack(fields))
local ttl = tonumber(ARGV[9])
for i = 1, 5 do
  if ttl > 0 then redis.call('EXPIRE', KEYS[i], ttl) else redis.call('PERSIST', KEYS[i]) end
end
return {1, v + 1, ep}
`);

/**
 * Fetch one archive hash of a session when its token moved.
 * KEYS: meta, hash (arch or uarch). ARGV: token field ('as' | 'au'), cached token or ''.
 * Reply: nil (no session) | {token} (unchanged) | {token, {id, payload, ...}}.
 */
export const ARCHIVE_FETCH = script('archive_fetch', 2, `
if redis.call('EXISTS', KEYS[1]) == 0 then return false end
local t = redis.call('HGET', KEYS[1], ARGV[1]) or ''
if ARGV[2] ~= '' and ARGV[2] == ('=' .. t) then return {t} end
return {t, redis.call('HGETALL', KEYS[2])}
`);

/**
 * Delete archive items of one session hash by id.
 * KEYS: meta, hash. ARGV: token field, new token, ids... Reply: number removed.
 */
export const ARCHIVE_DELETE = script('archive_delete', 2, `
local n = 0
for i = 3, #ARGV do n = n + redis.call('HDEL', KEYS[2], ARGV[i]) end
if n > 0 and redis.call('EXISTS', KEYS[1]) == 1 then redis.call('HSET', KEYS[1], ARGV[1], ARGV[2]) end
return n
`);

/**
 * Erase one session: count, then delete every key.
 * KEYS: meta, slots, events, arch, uarch. Reply: {existed, slots, archive items, events, user or ''}.
 */
export const ERASE = script('erase', 5, `
local existed = redis.call('EXISTS', KEYS[1])
local user = redis.call('HGET', KEYS[1], 'u') or ''
local slots = redis.call('HLEN', KEYS[2])
local items = redis.call('HLEN', KEYS[4]) + redis.call('HLEN', KEYS[5])
local events = redis.call('XLEN', KEYS[3])
redis.call('DEL', KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5])
return {existed, slots, items, events, user}
`);
