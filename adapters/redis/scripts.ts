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
-- The time of the oldest entry a log holds (nil when empty, or when its head block cannot be read).
local function headAt(log)
  local e = redis.call('LINDEX', log, 0)
  if not e then return nil end
  local m = string.byte(e, 1)
  if m > 1 then return tonumber(string.match(e, '^(%-?%d+):')) end
  local ok, at = pcall(function()
    if m == 1 then return stimes(e)[string.byte(e, 3) + 1] end
    local colon = string.find(e, ':', 3, true)
    local _, q = rvar(e, colon + 1)
    local z = rvar(e, q)
    return tonumber(string.sub(e, 3, colon - 1)) + ((z % 2 == 0) and z / 2 or -(z + 1) / 2)
  end)
  if ok then return at end
  return nil
end
-- Takes entries from the head of a log (h: the payload hash of a log written before blocks), oldest
-- first, while take(time, id) says so (id: a 0.2 element's entry id; nil for a block record). A block
-- loses records from its front (an open one is cut, a sealed one's dead count moves on) and goes when
-- none is left. Returns the positions taken (the head moves by them) and the entries deleted (a 0.2
-- element whose entry was already gone is a position, not an entry).
local function headtrim(h, log, take)
  local popped, removed = 0, 0
  while true do
    local el = redis.call('LINDEX', log, 0)
    if not el then break end
    local m = string.byte(el, 1)
    if m == 0 then
      local recs, colon = brecs(el)
      local k = 0
      for j = 1, #recs do
        if take(recs[j][2], nil) then k = j else break end
      end
      if k == 0 then break end
      if k == #recs then redis.call('LPOP', log)
      else redis.call('LSET', log, 0, '\\0' .. string.char(#recs - k) .. string.sub(el, 3, colon) .. string.sub(el, recs[k + 1][1])) end
      popped, removed = popped + k, removed + k
      if k < #recs then break end
    elseif m == 1 then
      local times, c, dead = stimes(el), string.byte(el, 2), string.byte(el, 3)
      local k = 0
      for j = dead + 1, c do
        if take(times[j], nil) then k = k + 1 else break end
      end
      if k == 0 then break end
      if dead + k == c then redis.call('LPOP', log)
      else redis.call('LSET', log, 0, string.sub(el, 1, 2) .. string.char(dead + k) .. string.sub(el, 4)) end
      popped, removed = popped + k, removed + k
      if dead + k < c then break end
    else
      local id = string.match(el, '^%-?%d+:(.*)$') or el
      if not take(tonumber(string.match(el, '^(%-?%d+):')), id) then break end
      redis.call('LPOP', log)
      popped = popped + 1
      removed = removed + redis.call('HDEL', h, id)
    end
  end
  return popped, removed
end
`;

/**
 * [stats] The store-wide figures, standalone Redis only (on Cluster these keys would cross hash slots,
 * so the store passes none and counts by SCAN). Appended to the KEYS of every script that changes a
 * session, from position `s`: the tenant's counters hash (sessions, slots, logbook), its tally (session
 * base -> "exists slots logbook" as last counted), its due set (session base scored by when its keys
 * expire by TTL) and two age indexes (session base scored by its oldest slot's creation time, and by its
 * oldest logbook entry's time). `restat` counts the session again and moves the counters by the
 * difference from its tally (or, for a session counted before tallies existed, from the figures the
 * script saw first), so no path — commit, erase, quarantine, delete, sweep, TTL expiry found by the
 * sweep — leaves them drifting. Defines `figures(...)` and `restat(...)` for the script that includes it,
 * after the block helpers (BLOCK_LUA).
 */
function statsLua(s: number): string {
  return `${BLOCK_LUA}
local S = ${s}
local function figures(meta, slots, arch, uarch)
  if not KEYS[S] or redis.call('EXISTS', meta) == 0 then return {0, 0, 0} end
  -- Entries in blocks are counted in meta (an / aun); a log written before blocks, by its hash.
  local c = redis.call('HMGET', meta, 'an', 'aun')
  return {1, redis.call('HLEN', slots), (tonumber(c[1] or '') or redis.call('HLEN', arch)) + (tonumber(c[2] or '') or redis.call('HLEN', uarch))}
end
-- expireAt: ms the session's keys expire at, 0 = never, -1 = unchanged. A caller that knows more
-- passes \`known\`: {figures after the change (nil: count them), slots or births may have changed, a
-- log's head may have changed}; an age index is then read again only when its source may have moved
-- (or the session has no tally yet), and the tally written only when the figures moved.
local function restat(before, meta, slots, arch, uarch, alog, ualog, born, expireAt, known)
  if not KEYS[S] then return end
  local member = string.sub(meta, 1, -6)
  local now = (known and known[1]) or figures(meta, slots, arch, uarch)
  local old = before
  local t = redis.call('HGET', KEYS[S + 1], member)
  local tallied = false
  if t then
    local a, b, c = string.match(t, '^(%d+) (%d+) (%d+)$')
    if a then old, tallied = {tonumber(a), tonumber(b), tonumber(c)}, true end
  end
  if now[1] ~= old[1] then redis.call('HINCRBY', KEYS[S], 'sessions', now[1] - old[1]) end
  if now[2] ~= old[2] then redis.call('HINCRBY', KEYS[S], 'slots', now[2] - old[2]) end
  if now[3] ~= old[3] then redis.call('HINCRBY', KEYS[S], 'logbook', now[3] - old[3]) end
  if now[1] == 0 then
    redis.call('HDEL', KEYS[S + 1], member)
    redis.call('ZREM', KEYS[S + 2], member)
    redis.call('ZREM', KEYS[S + 3], member)
    redis.call('ZREM', KEYS[S + 4], member)
    return
  end
  if not tallied or now[1] ~= old[1] or now[2] ~= old[2] or now[3] ~= old[3] then
    redis.call('HSET', KEYS[S + 1], member, now[1] .. ' ' .. now[2] .. ' ' .. now[3])
  end
  if expireAt > 0 then redis.call('ZADD', KEYS[S + 2], expireAt, member) elseif expireAt == 0 then redis.call('ZREM', KEYS[S + 2], member) end
  if not known or not tallied or known[2] then
    local first = redis.call('ZRANGE', born, 0, 0, 'WITHSCORES')
    if first[2] then redis.call('ZADD', KEYS[S + 3], first[2], member) else redis.call('ZREM', KEYS[S + 3], member) end
  end
  if not known or not tallied or known[3] then
    local la, lu = headAt(alog), headAt(ualog)
    local oldest = la
    if lu and (not oldest or lu < oldest) then oldest = lu end
    if oldest then redis.call('ZADD', KEYS[S + 4], oldest, member) else redis.call('ZREM', KEYS[S + 4], member) end
  end
end
`;
}

/** How many keys the store appends for the [stats] (see statsLua). */
export const STATS_KEYS = 5;

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
 * to the logbook slice written, append events (capped), bump the version, refresh the idle TTL (at most every tenth of it).
 * KEYS: meta, slots, events, arch, uarch, alog, ualog, gone (erase tombstone), cids (applied commit ids),
 * born (slot creation times), [stats] (see statsLua; standalone only).
 * ARGV: 1 expected version, 2 commit id, 3 epoch for a new session, 4 clock, 5 turns, 6 capacity,
 *       7 dim, 8 user or '', 9 ttl seconds (0 = none), 10 max events, 11 retention: max entries per
 *       slice (0 = none), 12 retention: age cutoff in epoch ms (0 = none), 13 #ops, 14 #logbook entries,
 *       15 #events, 16 fence: the session's erase time the writer saw ('' = none), 17 fence: the
 *       writer's clock when it accepted the turn ('' = unfenced), 18 fence ttl seconds (how long
 *       ids and tombstones live), then #ops x (index, payload or '' to free, creation ms), #entries x (atMs, record body), #events x json,
 *       then [stats] counter increments as (field, delta) pairs to the end.
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
export const COMMIT = script('commit', 10, statsLua(11) + `
local m = redis.call('HMGET', KEYS[1], 'v', 'ep', 'cap', 'dim', 'rc', 'an', 'aun', 'ah', 'auh', 'xr')
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
-- [stats] The figures before, from what meta already said (figures() for a partial state).
local before = {0, 0, 0}
if KEYS[S] and m[1] then
  before = {1, redis.call('HLEN', KEYS[2]), (tonumber(m[6] or '') or redis.call('HLEN', KEYS[4])) + (tonumber(m[7] or '') or redis.call('HLEN', KEYS[5]))}
elseif KEYS[S] then
  before = figures(KEYS[1], KEYS[2], KEYS[4], KEYS[5])
end
local ep = m[2]
-- What this commit may have changed or created, for restat and the idle TTL.
local slotsMoved, slotsFreed, slotsSet, headMoved, logNew, eventsNew = not m[1], not m[1], false, not m[1], false, false
local slotsWiped, slotsDelta = not m[1], 0 -- slots added less slots removed, from HSET/HDEL replies
if not m[1] then
  -- A new session (or one erased or expired) starts from nothing, whatever a partial state left behind.
  ep = ARGV[3]
  redis.call('DEL', KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], KEYS[10])
end
local cap = tonumber(ARGV[6])
if m[1] then
  local oldcap = tonumber(m[3] or '0')
  if tonumber(m[4] or '0') ~= tonumber(ARGV[7]) then
    redis.call('DEL', KEYS[2], KEYS[10])
    slotsMoved, slotsFreed, slotsWiped = true, true, true
  elseif oldcap > cap then
    slotsMoved, slotsFreed = true, true
    for i = cap, oldcap - 1 do
      slotsDelta = slotsDelta - redis.call('HDEL', KEYS[2], tostring(i))
      redis.call('ZREM', KEYS[10], tostring(i))
    end
  end
end
local nops, nlb, nev = tonumber(ARGV[13]), tonumber(ARGV[14]), tonumber(ARGV[15])
local a = 19
if nops > 0 then slotsMoved = true end
for i = 1, nops do
  if ARGV[a + 1] == '' then
    slotsFreed = true
    slotsDelta = slotsDelta - redis.call('HDEL', KEYS[2], ARGV[a])
    redis.call('ZREM', KEYS[10], ARGV[a])
  else
    slotsSet = true
    slotsDelta = slotsDelta + redis.call('HSET', KEYS[2], ARGV[a], ARGV[a + 1])
    redis.call('ZADD', KEYS[10], tonumber(ARGV[a + 2]), ARGV[a])
  end
  a = a + 3
end
local fields = {'v', v + 1, 'ep', ep, 'c', ARGV[4], 'n', ARGV[5], 'cap', ARGV[6], 'dim', ARGV[7]}
if not m[1] then
  -- Logbook epochs and heads start fresh with the session, so no cached copy of an erased one can match.
  -- Both slices counted from the start (the one written is set below), so no figure needs an HLEN.
  for _, f in ipairs({'as', ep, 'au', ep, 'ah', 0, 'auh', 0, 'an', 0, 'aun', 0}) do fields[#fields + 1] = f end
end
if ARGV[8] ~= '' then
  fields[#fields + 1] = 'u'
  fields[#fields + 1] = ARGV[8]
end
local h, log, headf, nf = KEYS[4], KEYS[6], 'ah', 'an'
if ARGV[8] ~= '' then h, log, headf, nf = KEYS[5], KEYS[7], 'auh', 'aun' end
-- Entries go into blocks (see codec.ts, logbook blocks): appended to the open block at the tail, or a new one.
local n = tonumber(m[ARGV[8] ~= '' and 7 or 6] or '-1')
if n < 0 then
  -- A log written before blocks: one entry per element; its head is indexed again (count it from now on).
  n, headMoved = redis.call('LLEN', log), true
end
local added = 0
local tail = nil
local sealed = '' -- an open block closed by this commit, for the writer to compress (SEAL)
for i = 1, nlb do
  local at, body = tonumber(ARGV[a]), ARGV[a + 1]
  a = a + 2
  if tail == nil then
    tail = redis.call('LINDEX', log, -1) or false
    -- An empty log: RPUSH creates the key, and its first entry becomes the head.
    if not tail then logNew, headMoved = true, true end
  end
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
-- Retention: oldest first from the head of the log, by age then by count (headtrim). A popped 0.2
-- element whose entry was already deleted (a tombstone) is not counted.
local dropAge, dropCount, popped = 0, 0, 0
local maxn, cutoff = tonumber(ARGV[11]), tonumber(ARGV[12])
if cutoff > 0 then
  local p, d = headtrim(h, log, function(at) return at ~= nil and at < cutoff end)
  popped, n, dropAge = popped + p, n - p, d
end
if maxn > 0 then
  -- take() counts n down as it agrees, so n is the entries left when it stops.
  local p, d = headtrim(h, log, function()
    if n > maxn then
      n = n - 1
      return true
    end
    return false
  end)
  popped, dropCount = popped + p, d
end
fields[#fields + 1] = nf
fields[#fields + 1] = n
if popped > 0 then
  fields[#fields + 1] = headf
  fields[#fields + 1] = tonumber(m[ARGV[8] ~= '' and 9 or 8] or '0') + popped
  headMoved = true
end
local maxe = tonumber(ARGV[10])
for i = 1, nev do
  if maxe > 0 then
    -- NOMKSTREAM: nil when the stream does not exist yet; then it is made, and needs its TTL.
    if not redis.call('XADD', KEYS[3], 'NOMKSTREAM', 'MAXLEN', '~', maxe, '*', 'e', ARGV[a]) then
      redis.call('XADD', KEYS[3], 'MAXLEN', '~', maxe, '*', 'e', ARGV[a])
      eventsNew = true
    end
  end
  a = a + 1
end
-- The idle TTL is refreshed on every key of the session at most every \`every\` ms (a tenth of the TTL,
-- at most a minute), and always for a new session or a changed TTL; meta field xr holds "ms:ttl" of
-- the last refresh. Between refreshes only a key this commit created gets it (a key that exists keeps
-- its TTL through HSET, RPUSH, LSET, ZADD, XADD), to the same time as the rest. So a session's keys go
-- between ttl - every and ttl after its last commit. Applied ids live keepfor + every from the
-- refresh (at least keepfor after any commit), and are pruned at refreshes.
local ttl = tonumber(ARGV[9])
local every = ttl > 0 and math.min(60000, ttl * 100) or 60000
local xat, xttl = string.match(m[10] or '', '^(%d+):(%d+)$')
local due = not m[1] or xttl == nil or tonumber(xttl) ~= ttl or nowms - tonumber(xat) >= every
if due then
  redis.call('ZREMRANGEBYSCORE', KEYS[9], '-inf', nowms - keepfor * 1000)
  redis.call('ZADD', KEYS[9], nowms, ARGV[2])
  redis.call('PEXPIRE', KEYS[9], keepfor * 1000 + every)
  fields[#fields + 1] = 'xr'
  fields[#fields + 1] = nowms .. ':' .. ttl
else
  redis.call('ZADD', KEYS[9], nowms, ARGV[2])
end
if rc ~= '' then redis.call('HDEL', KEYS[1], 'rc') end
redis.call('HSET', KEYS[1], unpack(fields))
local expireAt = -1
if due then
  for _, i in ipairs({1, 2, 3, 4, 5, 6, 7, 10}) do
    if ttl > 0 then redis.call('EXPIRE', KEYS[i], ttl) else redis.call('PERSIST', KEYS[i]) end
  end
  expireAt = ttl > 0 and (nowms + ttl * 1000) or 0
elseif ttl > 0 then
  -- Keys this commit may have created: the slots hash and births (when set into one that was empty,
  -- wiped or freed from, or not counted), the log (empty before), the event stream (made above).
  local made = {}
  if slotsSet and (slotsFreed or not KEYS[S] or before[2] == 0) then made[#made + 1] = KEYS[2]; made[#made + 1] = KEYS[10] end
  if logNew then made[#made + 1] = log end
  if eventsNew then made[#made + 1] = KEYS[3] end
  for _, key in ipairs(made) do redis.call('PEXPIREAT', key, tonumber(xat) + ttl * 1000) end
end
local after = nil
if KEYS[S] then
  local other = nil -- the other slice's count, as meta holds it after this commit
  if m[1] then other = tonumber(m[ARGV[8] ~= '' and 6 or 7] or '') else other = 0 end
  after = {1, slotsWiped and redis.call('HLEN', KEYS[2]) or (before[2] + slotsDelta), n + (other or redis.call('HLEN', ARGV[8] ~= '' and KEYS[4] or KEYS[5]))}
end
restat(before, KEYS[1], KEYS[2], KEYS[4], KEYS[5], KEYS[6], KEYS[7], KEYS[10], expireAt, {after, slotsMoved or due, headMoved or due})
-- The commit's own counter increments (field, delta pairs after the events): slot survival counts.
if KEYS[S] then
  while ARGV[a] do
    redis.call('HINCRBY', KEYS[S], ARGV[a], ARGV[a + 1])
    a = a + 2
  end
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
 * KEYS: meta, slots, arch, uarch, alog, ualog, born, the slice's log (alog | ualog), [stats].
 * ARGV: epoch field, new epoch, count field, entries removed, then (element index, block seen, new
 * block) triples. Reply: entries removed, or -1.
 */
export const LOG_REWRITE = script('log_rewrite', 8, statsLua(9) + `
local log = KEYS[8]
for i = 5, #ARGV, 3 do
  if redis.call('LINDEX', log, tonumber(ARGV[i])) ~= ARGV[i + 1] then return -1 end
end
local before = figures(KEYS[1], KEYS[2], KEYS[3], KEYS[4])
local gone = false
for i = 5, #ARGV, 3 do
  if ARGV[i + 2] == '' then
    redis.call('LSET', log, tonumber(ARGV[i]), '\\0\\0gone')
    gone = true
  else
    redis.call('LSET', log, tonumber(ARGV[i]), ARGV[i + 2])
  end
end
if gone then redis.call('LREM', log, 0, '\\0\\0gone') end
local k = tonumber(ARGV[4])
if redis.call('EXISTS', KEYS[1]) == 1 then
  redis.call('HSET', KEYS[1], ARGV[1], ARGV[2])
  local n = tonumber(redis.call('HGET', KEYS[1], ARGV[3]) or '-1')
  if n >= 0 then redis.call('HSET', KEYS[1], ARGV[3], math.max(0, n - k)) end
end
restat(before, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], -1)
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
 * Replace the tail of a log at rest by its sealed form (codec.ts, sealTail), if the tail — and, when
 * merging, the block before it — are still as the writer fetched them: a commit that appended since,
 * or a trim, makes it a no-op (the next idle seal tries again). Entries and positions do not change, so
 * the epoch and the counts stay. KEYS: log. ARGV: the tail as fetched, the block before it as fetched
 * ('' = the tail alone is replaced), the sealed block. Reply: 1 replaced | 0 changed meanwhile.
 */
export const SEAL_TAIL = script('seal_tail', 1, `
if redis.call('LINDEX', KEYS[1], -1) ~= ARGV[1] then return 0 end
if ARGV[2] == '' then
  redis.call('LSET', KEYS[1], -1, ARGV[3])
  return 1
end
if redis.call('LINDEX', KEYS[1], -2) ~= ARGV[2] then return 0 end
redis.call('LSET', KEYS[1], -2, ARGV[3])
redis.call('RPOP', KEYS[1])
return 1
`);

/**
 * Delete logbook entries of one session slice by id, with their log elements (so an id added again
 * later is not popped early by an old element); moves the epoch so cached copies refetch in full.
 * O(log length): deletes are rare (a promotion, an edit), never per turn. This takes the entries of
 * logs written before blocks (hash payloads); those in blocks go by LOG_REWRITE.
 * KEYS: meta, slots, arch, uarch, alog, ualog, born, then the hash and log of the slice (two of the
 * above), [stats]. ARGV: epoch field, new epoch, count field ('an' | 'aun'), ids... Reply: number removed.
 */
export const LOG_DELETE = script('log_delete', 9, statsLua(10) + `
local before = figures(KEYS[1], KEYS[2], KEYS[3], KEYS[4])
local h, log = KEYS[8], KEYS[9]
local want, n = {}, 0
for i = 4, #ARGV do
  if redis.call('HDEL', h, ARGV[i]) == 1 then
    want[ARGV[i]] = true
    n = n + 1
  end
end
if n == 0 then return 0 end
local gone = 0
for _, e in ipairs(redis.call('LRANGE', log, 0, -1)) do
  if string.byte(e, 1) > 1 then
    local id = string.match(e, '^%-?%d+:(.*)$') or e
    if want[id] then gone = gone + redis.call('LREM', log, 1, e) end
  end
end
if redis.call('EXISTS', KEYS[1]) == 1 then
  redis.call('HSET', KEYS[1], ARGV[1], ARGV[2])
  -- The count of entries the log holds (logs that have blocks too): ARGV[3] names it.
  local c = tonumber(redis.call('HGET', KEYS[1], ARGV[3]) or '-1')
  if c >= 0 then redis.call('HSET', KEYS[1], ARGV[3], math.max(0, c - gone)) end
end
restat(before, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], -1)
return n
`);

/**
 * Erase one session: move its tombstone forward (so no write fenced before now can land), count,
 * then delete every key.
 * KEYS: meta, slots, events, arch, uarch, alog, ualog, gone, cids, born, quarantine, [stats] (standalone only).
 * ARGV: 1 tombstone ttl seconds, 2 the time of the user erase this is part of (ms; 0 for a session erase).
 * Reply: {existed, slots, logbook entries, events, user or '', tombstone time}.
 */
export const ERASE = script('erase', 11, statsLua(12) + `
local t = redis.call('TIME')
local at = math.max(tonumber(t[1]) * 1000 + math.floor(tonumber(t[2]) / 1000), tonumber(ARGV[2]), tonumber(redis.call('GET', KEYS[8]) or '0') + 1)
redis.call('SET', KEYS[8], at, 'EX', tonumber(ARGV[1]))
local existed = redis.call('EXISTS', KEYS[1])
local user = redis.call('HGET', KEYS[1], 'u') or ''
local slots = redis.call('HLEN', KEYS[2])
local cn = redis.call('HMGET', KEYS[1], 'an', 'aun') -- entries in the logs; logs from before blocks: their hashes
local items = (tonumber(cn[1] or '') or redis.call('HLEN', KEYS[4])) + (tonumber(cn[2] or '') or redis.call('HLEN', KEYS[5]))
local events = redis.call('XLEN', KEYS[3])
local before = figures(KEYS[1], KEYS[2], KEYS[4], KEYS[5])
redis.call('DEL', KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], KEYS[9], KEYS[10], KEYS[11])
restat(before, KEYS[1], KEYS[2], KEYS[4], KEYS[5], KEYS[6], KEYS[7], KEYS[10], 0)
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
 * First step of a user erase: move the user's tombstone forward (from here on LINK and USER_CAP refuse
 * writes fenced before it), delete the user's entry index and read the sessions to erase.
 * KEYS: the user's session set, the user's tombstone, the user's entry index. ARGV: tombstone ttl seconds.
 * Reply: {tombstone time, {sessions...}}.
 */
export const USER_ERASE = script('user_erase', 3, `
local t = redis.call('TIME')
local at = math.max(tonumber(t[1]) * 1000 + math.floor(tonumber(t[2]) / 1000), tonumber(redis.call('GET', KEYS[2]) or '0') + 1)
redis.call('SET', KEYS[2], at, 'EX', tonumber(ARGV[1]))
redis.call('DEL', KEYS[3])
return {tostring(at), redis.call('SMEMBERS', KEYS[1])}
`);


/**
 * Move slot payloads that failed their check aside, so the session keeps working: each one still equal
 * to what the reader saw goes from the slots hash to the quarantine hash (field `index@seconds`), and
 * the version moves on, so every process's cached copy and every plan made on it are refreshed.
 * KEYS: meta, slots, quarantine, arch, uarch, alog, ualog, born, [stats]. ARGV: 1 ttl seconds for the
 * quarantine (0 = none), then field, payload pairs.
 * Reply: the number moved.
 */
export const QUARANTINE = script('quarantine', 8, statsLua(9) + `
local before = figures(KEYS[1], KEYS[2], KEYS[4], KEYS[5])
local moved = 0
local t = redis.call('TIME')
for i = 2, #ARGV, 2 do
  local cur = redis.call('HGET', KEYS[2], ARGV[i])
  if cur and cur == ARGV[i + 1] then
    redis.call('HSET', KEYS[3], ARGV[i] .. '@' .. t[1], cur)
    redis.call('HDEL', KEYS[2], ARGV[i])
    redis.call('ZREM', KEYS[8], ARGV[i])
    moved = moved + 1
  end
end
if moved > 0 then
  if redis.call('EXISTS', KEYS[1]) == 1 then redis.call('HINCRBY', KEYS[1], 'v', 1) end
  if tonumber(ARGV[1]) > 0 then redis.call('EXPIRE', KEYS[3], tonumber(ARGV[1])) end
  restat(before, KEYS[1], KEYS[2], KEYS[4], KEYS[5], KEYS[6], KEYS[7], KEYS[8], -1)
end
return moved
`);

/**
 * The retention sweep of one session: delete the slots created before a cutoff (found through the
 * `born` index, O(expired)) and the logbook entries (of both slices) older than a cutoff (from the head
 * of each log, O(expired); blocks lose their expired records). Moves the version on when a slot goes, so every cached copy and every plan
 * made on one is refreshed; moves the logbook heads, so every process's index drops the entries on
 * its next look. Idempotent: any number of processes may sweep the same session at once.
 * KEYS: meta, slots, arch, uarch, alog, ualog, born, [stats]. ARGV: 1 slot cutoff (ms, 0 = none),
 * 2 logbook cutoff (ms, 0 = none). Reply: {slots deleted, logbook entries deleted, user or ''}.
 */
export const SWEEP = script('sweep', 7, statsLua(8) + `
if redis.call('EXISTS', KEYS[1]) == 0 then
  restat({0, 0, 0}, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], 0)
  return {0, 0}
end
local before = figures(KEYS[1], KEYS[2], KEYS[3], KEYS[4])
local slots, items = 0, 0
local sc, lc = tonumber(ARGV[1]), tonumber(ARGV[2])
if sc > 0 then
  for _, i in ipairs(redis.call('ZRANGEBYSCORE', KEYS[7], '-inf', '(' .. sc)) do
    slots = slots + redis.call('HDEL', KEYS[2], i)
    redis.call('ZREM', KEYS[7], i)
  end
  if slots > 0 then redis.call('HINCRBY', KEYS[1], 'v', 1) end
end
if lc > 0 then
  -- Both slices, from the head of each log (headtrim): blocks lose their expired records.
  for _, s in ipairs({{KEYS[3], KEYS[5], 'ah', 'an'}, {KEYS[4], KEYS[6], 'auh', 'aun'}}) do
    local popped, removed = headtrim(s[1], s[2], function(at) return at ~= nil and at < lc end)
    if popped > 0 then
      redis.call('HINCRBY', KEYS[1], s[3], popped)
      local c = tonumber(redis.call('HGET', KEYS[1], s[4]) or '-1')
      if c >= 0 then redis.call('HSET', KEYS[1], s[4], math.max(0, c - popped)) end
    end
    items = items + removed
  end
end
restat(before, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], -1)
return {slots, items, redis.call('HGET', KEYS[1], 'u') or ''}
`);

/**
 * The counters of one session counted again (see statsLua): used by the sweep for a session the due
 * set says has expired by TTL, so the counters lose what Redis dropped without a script seeing it.
 * KEYS: meta, slots, arch, uarch, alog, ualog, born, [stats]. Reply: 1 when the session is gone.
 */
export const RESTAT = script('restat', 7, statsLua(8) + `
if not KEYS[S] or not redis.call('HGET', KEYS[S + 1], string.sub(KEYS[1], 1, -6)) then return 0 end
local ttl = redis.call('PTTL', KEYS[1])
local t = redis.call('TIME')
local nowms = tonumber(t[1]) * 1000 + math.floor(tonumber(t[2]) / 1000)
restat({0, 0, 0}, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], ttl > 0 and (nowms + ttl) or 0)
return ttl == -2 and 1 or 0
`);

/**
 * Move logbook records that failed their check aside, so searches of the scope keep working.
 * A payload of a log written before blocks, still equal to what the reader saw, goes from the slice's
 * hash to the session's quarantine hash (field `log:id@seconds`); its log element stays as a deleted
 * entry's does (readers skip it; retention pops it uncounted), so no position moves — unless blocks
 * follow the old elements (meta counts the log's entries, `an` / `aun`): then the element goes too. A block holding a
 * bad record is replaced, if still as the reader saw it, by the block without it ('' = the whole block
 * goes, when it cannot be read at all), the bad bytes kept under `log:name@seconds`; positions move, so
 * the slice's epoch moves (readers fetch it again in full) and its entry count (`an` / `aun`) is
 * counted again from the elements left (O(log length); quarantine is rare).
 * KEYS: meta, slots, arch, uarch, alog, ualog, born, quarantine, [stats]. ARGV: 1 slice ('s' session,
 * 'u' user), 2 ttl seconds for the quarantine (0 = none), 3 new epoch, 4 #pairs, then #pairs x (id,
 * payload), then per block: element index, block seen, new block or '', #kept, #kept x (name, bytes).
 * Reply: the number of entries moved.
 */
export const LOG_QUARANTINE = script('log_quarantine', 8, statsLua(9) + `
local before = figures(KEYS[1], KEYS[2], KEYS[3], KEYS[4])
local h, log, ef, cf = KEYS[3], KEYS[5], 'as', 'an'
if ARGV[1] == 'u' then h, log, ef, cf = KEYS[4], KEYS[6], 'au', 'aun' end
local t = redis.call('TIME')
local moved = 0
local a = 5
local olds = {}
for i = 1, tonumber(ARGV[4]) do
  local cur = redis.call('HGET', h, ARGV[a])
  if cur and cur == ARGV[a + 1] then
    redis.call('HSET', KEYS[8], 'log:' .. ARGV[a] .. '@' .. t[1], cur)
    redis.call('HDEL', h, ARGV[a])
    olds[ARGV[a]] = true
    moved = moved + 1
  end
  a = a + 2
end
-- Blocks: every one still as seen is changed (checked first, so indexes hold while they change).
local todo = {}
while ARGV[a] do
  local nk = tonumber(ARGV[a + 3])
  if redis.call('LINDEX', log, tonumber(ARGV[a])) == ARGV[a + 1] then todo[#todo + 1] = a end
  a = a + 4 + 2 * nk
end
local gone, lost = false, 0
for _, b in ipairs(todo) do
  local seen, new = ARGV[b + 1], ARGV[b + 2]
  for j = 1, tonumber(ARGV[b + 3]) do
    redis.call('HSET', KEYS[8], 'log:' .. ARGV[b + 2 + 2 * j] .. '@' .. t[1], ARGV[b + 3 + 2 * j])
  end
  if new == '' then
    redis.call('LSET', log, tonumber(ARGV[b]), '\\0\\0gone')
    gone = true
    lost = lost + bcount(seen)
  else
    redis.call('LSET', log, tonumber(ARGV[b]), new)
    lost = lost + bcount(seen) - bcount(new)
  end
end
if gone then redis.call('LREM', log, 0, '\\0\\0gone') end
-- A log that has blocks after its old elements counts entries in meta (an / aun), one per element:
-- there the element goes too (the count is counted again and the epoch moves).
local recount, unlisted = false, 0
if moved > 0 and redis.call('HEXISTS', KEYS[1], cf) == 1 then
  for _, e in ipairs(redis.call('LRANGE', log, 0, -1)) do
    if string.byte(e, 1) > 1 and olds[string.match(e, '^%-?%d+:(.*)$') or e] then unlisted = unlisted + redis.call('LREM', log, 1, e) end
  end
  recount = true
end
if (#todo > 0 or recount) and redis.call('EXISTS', KEYS[1]) == 1 then
  -- The entry count is counted again from the elements left (as LOG_FETCH counts them): a block too
  -- damaged to read may say any count in its header, so what it held is the count's drop.
  local c = tonumber(redis.call('HGET', KEYS[1], cf) or '-1')
  local left = 0
  for _, e in ipairs(redis.call('LRANGE', log, 0, -1)) do left = left + bcount(e) end
  if c >= 0 and #todo > 0 then lost = math.max(0, c - left - unlisted) end
  redis.call('HSET', KEYS[1], cf, left, ef, ARGV[3])
end
moved = moved + lost
if moved > 0 or #todo > 0 then
  if tonumber(ARGV[2]) > 0 then redis.call('EXPIRE', KEYS[8], tonumber(ARGV[2])) end
  restat(before, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], -1)
end
return moved
`);

/**
 * `logbook.maxEntries` over a user's whole scope (all their sessions), after a commit added entries to
 * one session's slice: index the new entries, then take the oldest past the cap out of the index and
 * name them for deletion (TRIM, per session). Refused, like LINK, for a write fenced before a user
 * erase (its session is being erased; the index must not name it again).
 * KEYS: the user's entry index, the user's tombstone. ARGV: 1 max entries, 2 the user's erase time the
 * writer saw ('' = none), 3 the writer's clock when it accepted the turn ('' = unfenced), then
 * (time, "session id") pairs. Reply: {"session id", time, ...} the entries to delete.
 */
export const USER_CAP = script('user_cap', 2, `
local gone = tonumber(redis.call('GET', KEYS[2]) or '0')
if (ARGV[2] ~= '' and gone > tonumber(ARGV[2])) or (ARGV[3] ~= '' and gone >= tonumber(ARGV[3])) then return {} end
for i = 4, #ARGV, 2 do redis.call('ZADD', KEYS[1], tonumber(ARGV[i]), ARGV[i + 1]) end
local over = redis.call('ZCARD', KEYS[1]) - tonumber(ARGV[1])
if over <= 0 then return {} end
return redis.call('ZPOPMIN', KEYS[1], over)
`);

/**
 * Delete user-scope logbook entries of one session (the user's cap, USER_CAP), named by id and time.
 * The oldest are normally at the head of the session's user log: those leave as retention's do
 * (headtrim: a block record goes when its time is one named, a 0.2 element when its id is; the head
 * moves on, so readers drop them without a full fetch). A 0.2 entry elsewhere is deleted with its log
 * element and the slice's epoch moved (readers fetch it again in full), as LOG_DELETE does; a block
 * record elsewhere is named in the reply for the store to take out (LOG_REWRITE).
 * KEYS: meta, slots, arch, uarch, alog, ualog, born, [stats]. ARGV: 1 new epoch, then (time, id) pairs.
 * Reply: {number deleted, {ids not found at the head or in the hash}}.
 */
export const TRIM = script('trim', 7, statsLua(8) + `
local before = figures(KEYS[1], KEYS[2], KEYS[3], KEYS[4])
local want, atn, left = {}, {}, 0
for i = 2, #ARGV, 2 do
  local at = tonumber(ARGV[i])
  if not want[ARGV[i + 1]] then
    want[ARGV[i + 1]] = at
    atn[at] = (atn[at] or 0) + 1
    left = left + 1
  end
end
local function named(id)
  atn[want[id]] = atn[want[id]] - 1
  want[id] = nil
  left = left - 1
end
local popped, n = headtrim(KEYS[4], KEYS[6], function(at, id)
  if left == 0 then return false end
  if id then
    if want[id] then
      named(id)
      return true
    end
    -- A tombstone (its entry already gone) goes with them; a live entry not named stops the trim.
    return redis.call('HEXISTS', KEYS[4], id) == 0
  end
  if at and (atn[at] or 0) > 0 then
    for wid, wat in pairs(want) do
      if wat == at then
        named(wid)
        break
      end
    end
    return true
  end
  return false
end)
local rest = {}
if left > 0 then
  local gone, old = 0, {}
  for id in pairs(want) do
    if redis.call('HDEL', KEYS[4], id) == 1 then
      old[id] = true
      n = n + 1
    else
      rest[#rest + 1] = id
    end
  end
  if next(old) then
    for _, e in ipairs(redis.call('LRANGE', KEYS[6], 0, -1)) do
      if string.byte(e, 1) > 1 and old[string.match(e, '^%-?%d+:(.*)$') or e] then gone = gone + redis.call('LREM', KEYS[6], 1, e) end
    end
  end
  if next(old) and redis.call('EXISTS', KEYS[1]) == 1 then
    redis.call('HSET', KEYS[1], 'au', ARGV[1])
    local c = tonumber(redis.call('HGET', KEYS[1], 'aun') or '-1')
    if c >= 0 then redis.call('HSET', KEYS[1], 'aun', math.max(0, c - gone)) end
  end
end
if popped > 0 and redis.call('EXISTS', KEYS[1]) == 1 then
  redis.call('HINCRBY', KEYS[1], 'auh', popped)
  local c = tonumber(redis.call('HGET', KEYS[1], 'aun') or '-1')
  if c >= 0 then redis.call('HSET', KEYS[1], 'aun', math.max(0, c - popped)) end
end
restat(before, KEYS[1], KEYS[2], KEYS[3], KEYS[4], KEYS[5], KEYS[6], KEYS[7], -1)
return {n, rest}
`);
