// The Lua scripts of the Redis store. Each touches only keys of one hash tag (one session, or one
// user's session set), so it runs atomically on a single Redis and on Redis Cluster alike. They are
// sent by SHA (EVALSHA) and re-sent in full once when a server answers NOSCRIPT (e.g. after a restart).

import { createHash } from 'node:crypto';
import { BLOCK_BYTES, BLOCK_RECORDS } from './codec.js';

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
 * Lua helpers for logbook blocks (layout in codec.ts): unsigned and zigzag varints, and the records of a
 * block as {start, time} (start = the record's first byte, time = block base + its delta).
 */
const BLOCK_LUA = `
local function uvar(v)
  local s = ''
  while v >= 128 do
    s = s .. string.char(v % 128 + 128)
    v = math.floor(v / 128)
  end
  return s .. string.char(v)
end
local function zz(d) if d >= 0 then return uvar(2 * d) end return uvar(-2 * d - 1) end
local function rvar(s, p)
  local v, m = 0, 1
  while true do
    local b = string.byte(s, p)
    p = p + 1
    v = v + (b % 128) * m
    if b < 128 then return v, p end
    m = m * 128
  end
end
local function brecs(el)
  local colon = string.find(el, ':', 3, true)
  local base = tonumber(string.sub(el, 3, colon - 1))
  local out, p = {}, colon + 1
  while p <= #el do
    local len, q = rvar(el, p)
    local z = rvar(el, q)
    local d = (z % 2 == 0) and z / 2 or -(z + 1) / 2
    out[#out + 1] = {p, base + d}
    p = q + len
  end
  return out, colon
end
-- A sealed block (0x01): count, dead (records trimmed from its front), base, then the records' times
-- as zigzag deltas; the bodies are compressed after them. Returns the times of every record (dead too).
local function stimes(el)
  local colon = string.find(el, ':', 4, true)
  local base = tonumber(string.sub(el, 4, colon - 1))
  local out, p = {}, colon + 1
  for j = 1, string.byte(el, 2) do
    local z
    z, p = rvar(el, p)
    out[j] = base + ((z % 2 == 0) and z / 2 or -(z + 1) / 2)
  end
  return out
end
local function bcount(el)
  local m = string.byte(el, 1)
  if m == 0 then return string.byte(el, 2) end
  if m == 1 then return string.byte(el, 2) - string.byte(el, 3) end
  return 1
end
`;

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
 * Commit one turn in one round trip: refuse a write fenced before an erase, recognise a commit id
 * already applied, check the version, apply slot ops, add logbook entries, apply the retention policy
 * to the logbook slice written, append events (capped), bump the version, refresh the idle TTL.
 * KEYS: meta, slots, events, arch, uarch, alog, ualog, gone (erase tombstone), cids (applied commit ids),
 * [stats] (the store-wide counters; standalone only).
 * ARGV: 1 expected version, 2 commit id, 3 epoch for a new session, 4 clock, 5 turns, 6 capacity,
 *       7 dim, 8 user or '', 9 ttl seconds (0 = none), 10 max events, 11 retention: max entries per
 *       slice (0 = none), 12 retention: age cutoff in epoch ms (0 = none), 13 #ops, 14 #logbook entries,
 *       15 #events, 16 fence: the session's erase time the writer saw ('' = none), 17 fence: the
 *       writer's clock when it accepted the turn ('' = unfenced), 18 fence ttl seconds (how long
 *       ids and tombstones live), then #ops x (index, payload or '' to free), #entries x (atMs, record body), #events x json.
 * A logbook slice is a log of blocks of entries in arrival order (codec.ts; logs written before blocks
 * hold `atMs:id` elements with the payloads in a hash, still read and trimmed); entries trimmed by
 * retention leave from the head of the log, the meta field `ah` / `auh` counts them and `an` / `aun`
 * counts the entries the log holds, so readers keep fetching only the new tail. Applied commit ids are kept in a sorted set scored by the
 * server's time, for ARGV[18] seconds: longer than any write may wait in an outbox, so a resend is
 * recognised however many commits came between.
 * Reply: {1, version, epoch, dropped by age, dropped by count, a block this commit closed or ''} applied | {2, version, epoch} this commit
 *        id was already applied | {0, version, epoch} version mismatch | {3, version, epoch} the
 *        session was erased after the writer's fence.
 */
export const COMMIT = script('commit', 9, `${BLOCK_LUA}
local m = redis.call('HMGET', KEYS[1], 'v', 'ep', 'cap', 'dim', 'rc')
local v = tonumber(m[1] or '0')
-- Fenced: refused when the session was erased after the writer looked, or not before it accepted the turn.
local gone = tonumber(redis.call('GET', KEYS[8]) or '0')
if (ARGV[16] ~= '' and gone > tonumber(ARGV[16])) or (ARGV[17] ~= '' and gone >= tonumber(ARGV[17])) then return {3, v, m[2] or ''} end
local t = redis.call('TIME')
local nowms = tonumber(t[1]) * 1000 + math.floor(tonumber(t[2]) / 1000)
local keepfor = tonumber(ARGV[18])
-- A commit id already applied (its reply lost in a disconnect, then sent again — even re-planned on
-- top of its own result, after any number of other commits) is reported as applied, not applied again.
if redis.call('ZSCORE', KEYS[9], ARGV[2]) then return {2, v, m[2] or ''} end
-- Sessions written before ids moved to their own set kept the last 16 in meta field rc.
local rc = m[5] or ''
if string.find(' ' .. rc, ' ' .. ARGV[2] .. '=', 1, true) then return {2, v, m[2] or ''} end
if v ~= tonumber(ARGV[1]) then return {0, v, m[2] or ''} end
local statS0 = m[1] and redis.call('HLEN', KEYS[2]) or 0 -- [stats] slots before this commit
local ep = m[2]
if not m[1] then
  -- A new session (or one erased or expired) starts from nothing, whatever a partial state left behind.
  ep = ARGV[3]
  redis.call('DEL', KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7])
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
local nops, nlb, nev = tonumber(ARGV[13]), tonumber(ARGV[14]), tonumber(ARGV[15])
local a = 19
for i = 1, nops do
  if ARGV[a + 1] == '' then redis.call('HDEL', KEYS[2], ARGV[a]) else redis.call('HSET', KEYS[2], ARGV[a], ARGV[a + 1]) end
  a = a + 2
end
local fields = {'v', v + 1, 'ep', ep, 'c', ARGV[4], 'n', ARGV[5], 'cap', ARGV[6], 'dim', ARGV[7]}
if not m[1] then
  -- Logbook epochs and heads start fresh with the session, so no cached copy of an erased one can match.
  for _, f in ipairs({'as', ep, 'au', ep, 'ah', 0, 'auh', 0}) do fields[#fields + 1] = f end
end
if ARGV[8] ~= '' then
  fields[#fields + 1] = 'u'
  fields[#fields + 1] = ARGV[8]
end
local h, log, headf, nf = KEYS[4], KEYS[6], 'ah', 'an'
if ARGV[8] ~= '' then h, log, headf, nf = KEYS[5], KEYS[7], 'auh', 'aun' end
-- Entries go into blocks (see codec.ts, logbook blocks): appended to the open block at the tail, or a new one.
local n = tonumber(redis.call('HGET', KEYS[1], nf) or '-1')
if n < 0 then n = redis.call('LLEN', log) end -- a log written before blocks: one entry per element
local added = 0
local tail = nil
local sealed = '' -- an open block closed by this commit, for the writer to compress (SEAL)
for i = 1, nlb do
  local at, body = tonumber(ARGV[a]), ARGV[a + 1]
  a = a + 2
  if tail == nil then tail = redis.call('LINDEX', log, -1) or false end
  local open = tail and string.byte(tail, 1) == 0
  if open and string.find(tail, body, 1, true) then
    -- A resent entry already in the open block (same bytes): not added twice.
  elseif open and string.byte(tail, 2) < ${BLOCK_RECORDS} and #tail < ${BLOCK_BYTES} then
    local colon = string.find(tail, ':', 3, true)
    local z = zz(at - tonumber(string.sub(tail, 3, colon - 1)))
    tail = '\\0' .. string.char(string.byte(tail, 2) + 1) .. string.sub(tail, 3) .. uvar(#z + #body) .. z .. body
    redis.call('LSET', log, -1, tail)
    added = added + 1
  else
    if open then sealed = tail end
    local z = zz(0)
    tail = '\\0' .. string.char(1) .. string.format('%.0f', at) .. ':' .. uvar(#z + #body) .. z .. body
    redis.call('RPUSH', log, tail)
    added = added + 1
  end
end
n = n + added
-- Retention: oldest first from the head of the log, by age then by count. A popped 0.2 element whose
-- entry was already deleted (a tombstone) is not counted.
local dropAge, dropCount, popped = 0, 0, 0
local maxn, cutoff = tonumber(ARGV[11]), tonumber(ARGV[12])
local function trim(byAge)
  while true do
    local el = redis.call('LINDEX', log, 0)
    if not el then return end
    if string.byte(el, 1) == 0 then
      local recs, colon = brecs(el)
      local k = 0
      for j = 1, #recs do
        if (byAge and recs[j][2] < cutoff) or (not byAge and n - k > maxn) then k = j else break end
      end
      if k == 0 then return end
      if k == #recs then redis.call('LPOP', log)
      else redis.call('LSET', log, 0, '\\0' .. string.char(#recs - k) .. string.sub(el, 3, colon) .. string.sub(el, recs[k + 1][1])) end
      popped, n = popped + k, n - k
      if byAge then dropAge = dropAge + k else dropCount = dropCount + k end
      if k < #recs then return end
    elseif string.byte(el, 1) == 1 then
      -- A sealed block: its dead count moves on; it goes when every record is dead.
      local times, c, dead = stimes(el), string.byte(el, 2), string.byte(el, 3)
      local k = 0
      for j = dead + 1, c do
        if (byAge and times[j] < cutoff) or (not byAge and n - k > maxn) then k = k + 1 else break end
      end
      if k == 0 then return end
      if dead + k == c then redis.call('LPOP', log)
      else redis.call('LSET', log, 0, string.sub(el, 1, 2) .. string.char(dead + k) .. string.sub(el, 4)) end
      popped, n = popped + k, n - k
      if byAge then dropAge = dropAge + k else dropCount = dropCount + k end
      if dead + k < c then return end
    else
      -- A 0.2 element 'atMs:id', its entry in the hash.
      if byAge then
        local at = tonumber(string.match(el, '^(%-?%d+):'))
        if at == nil or at >= cutoff then return end
      elseif n <= maxn then return end
      redis.call('LPOP', log)
      popped, n = popped + 1, n - 1
      local d = redis.call('HDEL', h, string.match(el, '^%-?%d+:(.*)$') or el)
      if byAge then dropAge = dropAge + d else dropCount = dropCount + d end
    end
  end
end
if cutoff > 0 then trim(true) end
if maxn > 0 then trim(false) end
fields[#fields + 1] = nf
fields[#fields + 1] = n
if popped > 0 then
  fields[#fields + 1] = headf
  fields[#fields + 1] = tonumber(redis.call('HGET', KEYS[1], headf) or '0') + popped
end
local maxe = tonumber(ARGV[10])
for i = 1, nev do
  if maxe > 0 then redis.call('XADD', KEYS[3], 'MAXLEN', '~', maxe, '*', 'e', ARGV[a]) end
  a = a + 1
end
redis.call('ZREMRANGEBYSCORE', KEYS[9], '-inf', nowms - keepfor * 1000)
redis.call('ZADD', KEYS[9], nowms, ARGV[2])
redis.call('EXPIRE', KEYS[9], keepfor)
if rc ~= '' then redis.call('HDEL', KEYS[1], 'rc') end
redis.call('HSET', KEYS[1], unpack(fields))
local ttl = tonumber(ARGV[9])
for i = 1, 7 do
  if ttl > 0 then redis.call('EXPIRE', KEYS[i], ttl) else redis.call('PERSIST', KEYS[i]) end
end
-- [stats] Store-wide counters (KEYS[10], standalone Redis only: on Cluster it would cross hash slots).
if KEYS[10] then
  if not m[1] then redis.call('HINCRBY', KEYS[10], 'sessions', 1) end
  redis.call('HINCRBY', KEYS[10], 'slots', redis.call('HLEN', KEYS[2]) - statS0)
  redis.call('HINCRBY', KEYS[10], 'logbook', added - dropAge - dropCount)
end
return {1, v + 1, ep, dropAge, dropCount, sealed}
`);

/**
 * Fetch what is new in one logbook slice of a session.
 * KEYS: meta, hash (arch | uarch; payloads of logs written before blocks), log (alog | ualog).
 * ARGV: epoch field ('as' | 'au'), head field ('ah' | 'auh'), '=' .. cached epoch or '' (nothing
 * cached), cached absolute end of the log, count field ('an' | 'aun').
 * Positions count entries and are absolute: the head counts entries trimmed from the front since the
 * session began. A block holds several entries, so a delta starts at the element holding the cached
 * end, cut to the entries after it (skip says how many entries of a first `atMs:id` element to pass over: 0).
 * Reply: nil (no session) | {epoch, head, end} (unchanged) | {epoch, head, end, 'd', elements, payloads,
 * skip} (the elements holding the entries after the cached end) | {epoch, head, end, 'f', elements,
 * payloads, 0} (everything: first fetch, epoch moved, or too far behind). Payloads align with elements:
 * false for a block, the hash payload for an `atMs:id` element (false when that entry was deleted).
 */
export const LOG_FETCH = script('log_fetch', 3, `${BLOCK_LUA}
local mh = redis.call('HMGET', KEYS[1], 'v', ARGV[1], ARGV[2], ARGV[5])
if not mh[1] then return false end -- no session (every commit writes v)
local ep = mh[2] or ''
local head = tonumber(mh[3] or '0')
local n = tonumber(mh[4] or '-1')
if n < 0 then n = redis.call('LLEN', KEYS[3]) end
local stop = head + n
local from = tonumber(ARGV[4])
local mode, skip = 'f', 0
local els
if ARGV[3] ~= '' and ARGV[3] == ('=' .. ep) and from >= head and from <= stop and stop - from <= 1000 then
  if from == stop then return {ep, head, stop} end
  mode = 'd'
  local need, got, i = stop - from, 0, 0
  while got < need do
    i = i - 1
    local el = redis.call('LINDEX', KEYS[3], i)
    if not el then break end
    got = got + bcount(el)
  end
  els = redis.call('LRANGE', KEYS[3], i, -1)
  skip = math.max(0, got - need)
  -- Only the records the reader lacks: the first block is cut after its first skip records.
  if skip > 0 and string.byte(els[1], 1) == 0 then
    local recs, colon = brecs(els[1])
    els[1] = '\\0' .. string.char(#recs - skip) .. string.sub(els[1], 3, colon) .. string.sub(els[1], recs[skip + 1][1])
    skip = 0
  end
else
  els = redis.call('LRANGE', KEYS[3], 0, -1)
end
local vals, ids, at = {}, {}, {}
for i = 1, #els do
  vals[i] = false
  if string.byte(els[i], 1) > 1 then
    ids[#ids + 1] = string.match(els[i], '^%-?%d+:(.*)$') or els[i]
    at[#at + 1] = i
  end
end
-- HMGET in chunks: unpack() of thousands of arguments overflows Lua's C stack.
for c = 1, #ids, 500 do
  local got = redis.call('HMGET', KEYS[2], unpack(ids, c, math.min(c + 499, #ids)))
  for j = 1, #got do vals[at[c + j - 1]] = got[j] end
end
return {ep, head, stop, mode, els, vals, skip}
`);

/**
 * Take entries out of blocks (deleteLogbook): the reader fetched the log, found the records, and sends
 * each changed block as it saw it and as it should be ('' = remove the block). Applied only when every
 * block is still as seen (else -1: fetch and try again); moves the epoch so cached copies refetch in full.
 * KEYS: meta, log, [stats]. ARGV: epoch field, new epoch, count field, entries removed, then
 * (element index, block seen, new block) triples. Reply: entries removed, or -1.
 */
export const LOG_REWRITE = script('log_rewrite', 2, `
for i = 5, #ARGV, 3 do
  if redis.call('LINDEX', KEYS[2], tonumber(ARGV[i])) ~= ARGV[i + 1] then return -1 end
end
local gone = false
for i = 5, #ARGV, 3 do
  if ARGV[i + 2] == '' then
    redis.call('LSET', KEYS[2], tonumber(ARGV[i]), '\\0\\0gone')
    gone = true
  else
    redis.call('LSET', KEYS[2], tonumber(ARGV[i]), ARGV[i + 2])
  end
end
if gone then redis.call('LREM', KEYS[2], 0, '\\0\\0gone') end
local k = tonumber(ARGV[4])
if redis.call('EXISTS', KEYS[1]) == 1 then
  redis.call('HSET', KEYS[1], ARGV[1], ARGV[2])
  local n = tonumber(redis.call('HGET', KEYS[1], ARGV[3]) or '-1')
  if n >= 0 then redis.call('HSET', KEYS[1], ARGV[3], math.max(0, n - k)) end
end
if KEYS[3] then redis.call('HINCRBY', KEYS[3], 'logbook', 0 - k) end -- [stats]
return k
`);

/**
 * Replace a closed block by its sealed (compressed) form, if it is still there as the writer saw it
 * (near the tail: a commit closed it a moment ago). Positions and entries do not change, so the epoch
 * stays. KEYS: log. ARGV: the block as closed, the sealed block. Reply: 1 replaced | 0 not found.
 */
export const SEAL = script('seal', 1, `
for i = -1, -8, -1 do
  local el = redis.call('LINDEX', KEYS[1], i)
  if not el then return 0 end
  if el == ARGV[1] then
    redis.call('LSET', KEYS[1], i, ARGV[2])
    return 1
  end
end
return 0
`);

/**
 * Delete logbook entries of one session slice by id, with their log elements (so an id added again
 * later is not popped early by an old element); moves the epoch so cached copies refetch in full.
 * O(log length): deletes are rare (a promotion, an edit), never per turn.
 * KEYS: meta, hash, log, [stats]. ARGV: epoch field, new epoch, count field ('an' | 'aun'), ids... Reply: number removed.
 */
export const LOG_DELETE = script('log_delete', 3, `
local want, n = {}, 0
for i = 4, #ARGV do
  if redis.call('HDEL', KEYS[2], ARGV[i]) == 1 then
    want[ARGV[i]] = true
    n = n + 1
  end
end
if n == 0 then return 0 end
if KEYS[4] then redis.call('HINCRBY', KEYS[4], 'logbook', 0 - n) end -- [stats]
local gone = 0
for _, e in ipairs(redis.call('LRANGE', KEYS[3], 0, -1)) do
  if string.byte(e, 1) > 1 then
    local id = string.match(e, '^%-?%d+:(.*)$') or e
    if want[id] then gone = gone + redis.call('LREM', KEYS[3], 1, e) end
  end
end
if redis.call('EXISTS', KEYS[1]) == 1 then
  redis.call('HSET', KEYS[1], ARGV[1], ARGV[2])
  -- The count of entries the log holds (logs that have blocks too): ARGV[3] names it.
  local c = ARGV[3] and tonumber(redis.call('HGET', KEYS[1], ARGV[3]) or '-1') or -1
  if c >= 0 then redis.call('HSET', KEYS[1], ARGV[3], math.max(0, c - gone)) end
end
return n
`);

/**
 * Erase one session: move its tombstone forward (so no write fenced before now can land), count,
 * then delete every key.
 * KEYS: meta, slots, events, arch, uarch, alog, ualog, gone, cids, quarantine, [stats] (standalone only).
 * ARGV: 1 tombstone ttl seconds, 2 the time of the user erase this is part of (ms; 0 for a session erase).
 * Reply: {existed, slots, logbook entries, events, user or '', tombstone time}.
 */
export const ERASE = script('erase', 10, `
local t = redis.call('TIME')
local at = math.max(tonumber(t[1]) * 1000 + math.floor(tonumber(t[2]) / 1000), tonumber(ARGV[2]), tonumber(redis.call('GET', KEYS[8]) or '0') + 1)
redis.call('SET', KEYS[8], at, 'EX', tonumber(ARGV[1]))
local existed = redis.call('EXISTS', KEYS[1])
local user = redis.call('HGET', KEYS[1], 'u') or ''
local slots = redis.call('HLEN', KEYS[2])
local cn = redis.call('HMGET', KEYS[1], 'an', 'aun') -- entries in the logs; logs from before blocks: their hashes
local items = (tonumber(cn[1] or '') or redis.call('HLEN', KEYS[4])) + (tonumber(cn[2] or '') or redis.call('HLEN', KEYS[5]))
local events = redis.call('XLEN', KEYS[3])
redis.call('DEL', KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], KEYS[9], KEYS[10])
if KEYS[11] then -- [stats] (0 - x, not -x: Lua's -0 reaches Redis as "-0", which HINCRBY refuses)
  redis.call('HINCRBY', KEYS[11], 'sessions', 0 - existed)
  redis.call('HINCRBY', KEYS[11], 'slots', 0 - slots)
  redis.call('HINCRBY', KEYS[11], 'logbook', 0 - items)
end
return {existed, slots, items, events, user, tostring(at)}
`);

/**
 * Link a session to its user, unless the user was erased after the writer's fence. Runs before every
 * commit that may be a session's first under its user, on the user's hash tag, so it and a user erase
 * (USER_ERASE) are atomic with respect to each other: a session is either in the set the erase reads,
 * or refused here.
 * KEYS: the user's session set, the user's tombstone. ARGV: session, the user's erase time the writer
 * saw ('' = none), the writer's clock when it accepted the turn ('' = unfenced).
 * Reply: 1 linked | 0 refused (erased after the fence).
 */
export const LINK = script('link', 2, `
local gone = tonumber(redis.call('GET', KEYS[2]) or '0')
if (ARGV[2] ~= '' and gone > tonumber(ARGV[2])) or (ARGV[3] ~= '' and gone >= tonumber(ARGV[3])) then return 0 end
redis.call('SADD', KEYS[1], ARGV[1])
return 1
`);

/**
 * First step of a user erase: move the user's tombstone forward (from here on LINK refuses writes
 * fenced before it) and read the sessions to erase.
 * KEYS: the user's session set, the user's tombstone. ARGV: tombstone ttl seconds.
 * Reply: {tombstone time, {sessions...}}.
 */
export const USER_ERASE = script('user_erase', 2, `
local t = redis.call('TIME')
local at = math.max(tonumber(t[1]) * 1000 + math.floor(tonumber(t[2]) / 1000), tonumber(redis.call('GET', KEYS[2]) or '0') + 1)
redis.call('SET', KEYS[2], at, 'EX', tonumber(ARGV[1]))
return {tostring(at), redis.call('SMEMBERS', KEYS[1])}
`);


/**
 * Move slot payloads that failed their check aside, so the session keeps working: each one still equal
 * to what the reader saw goes from the slots hash to the quarantine hash (field `index@seconds`), and
 * the version moves on, so every process's cached copy and every plan made on it are refreshed.
 * KEYS: meta, slots, quarantine. ARGV: 1 ttl seconds for the quarantine (0 = none), then field, payload pairs.
 * Reply: the number moved.
 */
export const QUARANTINE = script('quarantine', 3, `
local moved = 0
local t = redis.call('TIME')
for i = 2, #ARGV, 2 do
  local cur = redis.call('HGET', KEYS[2], ARGV[i])
  if cur and cur == ARGV[i + 1] then
    redis.call('HSET', KEYS[3], ARGV[i] .. '@' .. t[1], cur)
    redis.call('HDEL', KEYS[2], ARGV[i])
    moved = moved + 1
  end
end
if moved > 0 then
  if redis.call('EXISTS', KEYS[1]) == 1 then redis.call('HINCRBY', KEYS[1], 'v', 1) end
  if tonumber(ARGV[1]) > 0 then redis.call('EXPIRE', KEYS[3], tonumber(ARGV[1])) end
end
return moved
`);
