--- Lua sugar for perturbation series (ls.perturb): check against exact
-- diagonalization, Pade approximants, a ratio-test radius, totable and the
-- printed report. The numerics of the series itself are in C (series.c).
return function(ls, core)
  local methods = core._series_methods
  local meta = core._series_meta

  local function coeffs(s, level)
    local a = {}
    for k = 0, s:order() do a[k] = s:energy(level, k) end
    return a
  end

  local function argcheck_level(s, level, fname)
    if math.type(level) ~= "integer" then
      error("bad argument #1 to '" .. fname .. "' (level must be an integer)", 3)
    end
    local n = s:dim()
    if level < 1 or level > n then
      error(string.format("bad argument #1 to '%s' (level must be from 1 to %d, got %d)", fname, n, level), 3)
    end
    local ok, e = pcall(s.energy, s, level, 0) -- a level left out by the 'levels' option
    if not ok then
      error("bad argument #1 to '" .. fname .. "' (" .. (tostring(e):match("%((.*)%)$") or tostring(e)) .. ")", 3)
    end
  end

  local function argcheck_lambda(lambda, fname, argn)
    if type(lambda) ~= "number" or lambda ~= lambda or lambda == math.huge or lambda == -math.huge then
      error(string.format("bad argument #%d to '%s' (lambda must be a finite number)", argn, fname), 3)
    end
  end

  --- s:coefficients(level) -> {[0]=E0, E1, ..., EK}
  function methods.coefficients(s, level)
    argcheck_level(s, level, "coefficients")
    return coeffs(s, level)
  end

  --- Ratio test on the last nonzero coefficients: radius ~ |a_{k-1}/a_k|.
  -- Returns the estimate (or nil when the coefficients vanish) and a note.
  -- a member of a model space: the ratio test on the norms of its effective
  -- Hamiltonian's terms, the series that s:at sums
  local function space_norms(s, level)
    local sp = s:info(level).model_space
    if not sp then return nil end
    for g, grp in ipairs(s:groups()) do
      if grp.model_space == sp then
        local a = {}
        for k = 0, grp.order do
          local t, acc = s:group_term(g, k), 0
          local d = t:dim()
          for i = 1, d do
            for j = 1, d do
              local re, im = t:get(i, j)
              acc = acc + re * re + im * im
            end
          end
          a[k] = math.sqrt(acc)
        end
        return a, grp.order
      end
    end
  end

  --- Solve a small dense linear system with partial pivoting (A is rows).
  local function solve(A, b)
    local n = #b
    for c = 1, n do
      local p, best = c, math.abs(A[c][c])
      for r = c + 1, n do
        if math.abs(A[r][c]) > best then p, best = r, math.abs(A[r][c]) end
      end
      if best == 0 then return nil end
      A[c], A[p] = A[p], A[c]
      b[c], b[p] = b[p], b[c]
      for r = c + 1, n do
        local f = A[r][c] / A[c][c]
        if f ~= 0 then
          for j = c, n do A[r][j] = A[r][j] - f * A[c][j] end
          b[r] = b[r] - f * b[c]
        end
      end
    end
    local x = {}
    for r = n, 1, -1 do
      local acc = b[r]
      for j = r + 1, n do acc = acc - A[r][j] * x[j] end
      x[r] = acc / A[r][r]
    end
    return x
  end

  -- The growth rate of |a_k| over orders [lo, hi]: the upper envelope of
  -- log|a_k| (its convex hull from above, so vanishing or oscillating
  -- coefficients do not pull it down), its longest edge's slope -log R
  -- (Cauchy-Hadamard: 1/R = limsup |a_k|^(1/k); common practice).
  local function envelope_radius(a, lo, hi, noise)
    local pts = {}
    for k = lo, hi do
      if a[k] ~= 0 and math.abs(a[k]) > noise(k) and math.abs(a[k]) < math.huge then
        pts[#pts + 1] = { k, math.log(math.abs(a[k])) }
      end
    end
    if #pts < 2 then return nil end
    local hull = {}
    for _, p in ipairs(pts) do
      while #hull >= 2 do
        local o, q = hull[#hull - 1], hull[#hull]
        if (q[1] - o[1]) * (p[2] - o[2]) - (q[2] - o[2]) * (p[1] - o[1]) >= 0 then hull[#hull] = nil else break end
      end
      hull[#hull + 1] = p
    end
    local best, slope = -1, nil
    for i = 2, #hull do
      local len = hull[i][1] - hull[i - 1][1]
      if len > best then best, slope = len, (hull[i][2] - hull[i - 1][2]) / len end
    end
    return math.exp(-slope)
  end

  --- s:radius(level) -> estimate, note: the radius of convergence in lambda
  -- from the growth of the coefficients over the upper half of the orders,
  -- and how sure it is (the orders K/4..K/2 give a second estimate).
  function methods.radius(s, level)
    argcheck_level(s, level, "radius")
    local a, K = space_norms(s, level)
    if not a then a, K = coeffs(s, level), s:order() end
    -- rounding noise of a(k): 1e-13 of the first nonzero coefficient,
    -- grown by (||V|| / gap)^k, the bound on the terms' growth (a[1]
    -- vanishes whenever V has no diagonal element, e.g. g x on an
    -- oscillator; a terminating series leaves only this noise)
    local ref, kref = 0, 1
    for k = 1, K do if a[k] ~= 0 then ref, kref = a[k], k; break end end
    if ref == 0 then return nil, "coefficients vanish: no finite radius estimate" end
    local gap = s:info(level).min_denominator
    local q = (gap > 0 and gap < math.huge) and math.max(1e-300, s:vnorm() / gap) or 1
    -- (a coefficient above 1e-3 of the first is never taken for noise: the
    -- bound can be far above a large V's real growth)
    local function noise(k) return math.min(1e-13 * math.abs(ref) * q ^ (k - kref), 1e-3 * math.abs(ref)) end
    local mid = math.max(1, K // 2)
    local late = envelope_radius(a, mid, K, noise) or envelope_radius(a, 1, K, noise)
    if not late then return nil, "coefficients vanish: no finite radius estimate" end
    local note = string.format("growth of |a(k)| over orders %d..%d", mid, K)
    local early = K >= 8 and envelope_radius(a, math.max(1, K // 4), mid, noise) or nil
    if not early then
      note = note .. "; too few orders for a second estimate: uncertain"
    elseif late < 0.8 * early then
      note = note .. string.format("; ratios still falling (radius may be smaller still, or 0): orders %d..%d gave %.4g",
        math.max(1, K // 4), mid, early)
    elseif late > 1.25 * early then
      note = note .. string.format("; still rising: orders %d..%d gave %.4g, uncertain", math.max(1, K // 4), mid, early)
    else
      note = note .. string.format("; orders %d..%d agree within %.0f%%", math.max(1, K // 4), mid,
        100 * math.abs(late - early) / late)
    end
    return late, note
  end

  --- s:pade(level, lambda [, L, M]) -> value of the [L/M] Pade approximant
  -- (Baker & Graves-Morris, Pade Approximants, CUP 1996); default the
  -- diagonal or near-diagonal L + M = K. Double precision: keep M <~ 10.
  function methods.pade(s, level, lambda, L, M)
    argcheck_level(s, level, "pade")
    argcheck_lambda(lambda, "pade", 2)
    local K = s:order()
    if L == nil and M == nil then
      M = K // 2
      L = K - M
    elseif L == nil or M == nil then
      error("bad argument to 'pade' (give both L and M, or neither)", 2)
    end
    -- (L > K and M > K first: L + M wraps around for math.maxinteger)
    if math.type(L) ~= "integer" or math.type(M) ~= "integer" or L < 0 or M < 0 or L > K or M > K
      or L + M > K then
      error(string.format("bad argument #3 to 'pade' (need integers L, M >= 0 with L + M <= %d)", K), 2)
    end
    local a = coeffs(s, level)
    local function at(k) return k >= 0 and a[k] or 0 end
    local b = { [0] = 1 }
    if M > 0 then
      local A, rhs = {}, {}
      for r = 1, M do
        local k = L + r
        A[r] = {}
        for j = 1, M do A[r][j] = at(k - j) end
        rhs[r] = -at(k)
      end
      local x = solve(A, rhs)
      if not x then error("pade: singular Pade system for level " .. level, 2) end
      for j = 1, M do b[j] = x[j] end
    end
    local p, q = 0, 0
    for i = L, 0, -1 do
      local pi = 0
      for j = 0, math.min(i, M) do pi = pi + b[j] * at(i - j) end
      p = p * lambda + pi
    end
    for j = M, 0, -1 do q = q * lambda + b[j] end
    return p / q
  end

  -- The series' state of a level at lambda, summed to the orders kept
  -- (at most K - 1); nil when no states were kept.
  local function series_state(s, lev, lambda)
    local info = s:info(lev)
    local top = math.min(s:order() - 1, info.state_orders or -1)
    if top < 0 then return nil end
    local psi = s:state(lev, 0)
    local f = 1
    for k = 1, top do
      f = f * lambda
      psi = psi + f * s:state(lev, k)
    end
    return psi
  end

  -- Pair each chosen level with the exact level it continues into (issue:
  -- ascending rank is wrong as soon as levels cross): a level alone by the
  -- overlap of its series state with the exact vectors; a model space's d
  -- members with the d exact levels of largest weight on the members'
  -- unperturbed states, ranked ascending as its eigenvalues are. Greedy by
  -- descending weight (the weights are near a permutation wherever the
  -- series means anything; common practice). Returns pair[lev] = {i, w}.
  local function pair_levels(s, chosen, E, U, lambda)
    local units, spaces = {}, {}
    for _, lev in ipairs(chosen) do
      local sp = s:info(lev).model_space
      if sp then
        if not spaces[sp] then
          spaces[sp] = { members = {}, vecs = {} }
          units[#units + 1] = spaces[sp]
        end
        local u = spaces[sp]
        u.members[#u.members + 1] = lev
        u.vecs[#u.vecs + 1] = s:state(lev, 0)
      else
        local psi = series_state(s, lev, lambda)
        if not psi then return nil end
        local nrm = math.sqrt(psi:dot(psi))
        units[#units + 1] = { members = { lev }, vecs = { psi / nrm } }
      end
    end
    -- weights: |<x_i | v>|^2 summed over each unit's vectors
    local cols = {}
    for _, u in ipairs(units) do
      for _, v in ipairs(u.vecs) do cols[#cols + 1] = v end
    end
    local O = (U:adj() * ls.blocks { cols }):totable()
    local cand, c = {}, 0
    for ui, u in ipairs(units) do
      u.w, u.got = {}, {}
      for i = 1, #E do u.w[i] = 0 end
      for _ = 1, #u.vecs do
        c = c + 1
        for i = 1, #E do
          local z = O[i][c]
          -- a number (real op) or a {re, im} pair (complex op)
          u.w[i] = u.w[i] + (type(z) == "number" and z * z or z[1] * z[1] + z[2] * z[2])
        end
      end
      for i = 1, #E do cand[#cand + 1] = { u.w[i], ui, i } end
    end
    table.sort(cand, function(a, b)
      if a[1] ~= b[1] then return a[1] > b[1] end
      if a[2] ~= b[2] then return a[2] < b[2] end
      return a[3] < b[3]
    end)
    local taken = {}
    for _, t in ipairs(cand) do
      local u = units[t[2]]
      if not taken[t[3]] and #u.got < #u.members then
        taken[t[3]] = true
        u.got[#u.got + 1] = t[3]
      end
    end
    local pair = {}
    for _, u in ipairs(units) do
      if #u.got < #u.members then return nil end
      table.sort(u.got)
      local mem = {}
      for r, lev in ipairs(u.members) do mem[r] = { lev, s:at(lev, lambda) } end
      table.sort(mem, function(a, b) return a[2] < b[2] end)
      for r, m in ipairs(mem) do pair[m[1]] = { u.got[r], u.w[u.got[r]] } end
    end
    return pair
  end

  -- The nearest level left outside the level's group, when it lies within
  -- the joining rule at |lambda| (gap below near_factor |lambda| coupling):
  -- the neighbour table and the rule's numbers; nil when it does not.
  local function neighbour_within(s, info, lambda)
    local nb = info.neighbour
    if not (nb and nb.level) then return nil end
    local lm, nf, mode = s:grouping()
    if nb.gap < nf * math.abs(lambda) * nb.coupling then return nb, lm, nf, mode end
  end

  -- A check row's warning, the first rule that applies: a neighbour left
  -- outside within the joining rule; the norm rule where no neighbour was
  -- looked at (a member, hand-chosen groups); an error above a tenth of the
  -- level's shift; lambda beyond the estimated radius; a poor pairing.
  local function row_warning(s, lev, info, lambda, row)
    local al, K = math.abs(lambda), s:order()
    local nb, lm, nf, mode = neighbour_within(s, info, lambda)
    if nb then
      local why = mode == "exact" and "groups = \"exact\"" or string.format("lambda_max = %g < |lambda| = %g", lm, al)
      return string.format("level %d is %.3g away, coupled by %.3g: the gap is below %g x |lambda| x coupling" ..
        " = %.3g: series unreliable; it was left outside a model space because %s; give lambda_max = %g" ..
        " (or groups = {{...}})", nb.level, nb.gap, nb.coupling, nf, nf * al * nb.coupling, why, al)
    end
    if not info.neighbour and info.min_denominator < al * s:vnorm() then
      return string.format("small denominator %.3g below |lambda|*||V|| = %.3g: series unreliable",
        info.min_denominator, al * s:vnorm())
    end
    local err, shift = row.error, math.abs(row.exact - info.E0)
    if math.abs(err) > 0.1 * shift and math.abs(err) > 1e-9 * math.max(1, math.abs(info.E0)) then
      return string.format("error %.3g is more than a tenth of the level's shift %.3g: the series at order %d" ..
        " does not describe this level at lambda = %g", err, shift, K, lambda)
    end
    local okr, rad, rnote = pcall(methods.radius, s, lev)
    if okr and rad and al > rad then
      return string.format("|lambda| = %g is beyond the series' estimated radius %.4g (%s)", al, rad, rnote)
    end
    if row.overlap and row.overlap < 0.5 then
      return string.format("paired with exact level %d by an overlap of only %.3g: the series state is far" ..
        " from every exact state", row.exact_level, row.overlap)
    end
  end

  --- s:check(lambda) -> {lambda=, pairing=, levels={ {level=, series=, exact=, exact_level=, overlap=, error=,
  ---   tail=, warning=}... }, max_error=}
  -- Exact values from diagonalizing H0 + lambda V; each level is compared
  -- with the exact level it continues into (pairing = "overlap"), or with
  -- the exact level of the same ascending rank when no states were kept
  -- (pairing = "rank": valid while levels do not cross).
  function methods.check(s, lambda)
    argcheck_lambda(lambda, "check", 1)
    local H0, V = s:operators()
    local chosen = s:chosen()
    local n = s:dim()
    -- only the levels up to the highest one checked, with room for levels
    -- that cross: a large sparse H goes to the Krylov path instead of a full
    -- dense spectrum
    local top = 0
    for _, lev in ipairs(chosen) do top = math.max(top, lev) end
    local states = s:info(chosen[1]).state_orders >= 0
    local count = states and math.min(n, top + math.max(8, top)) or top
    local ok, E, U = pcall(function() return ls.eigen(H0 + lambda * V, { count = count, vectors = states }) end)
    if not ok then -- e.g. lambda so large that H0 + lambda V overflows
      error("bad argument #1 to 'check' (exact diagonalization of H0 + lambda V at lambda = "
        .. tostring(lambda) .. " failed: " .. (tostring(E):gsub("^[^:]*:%d+: ", "")) .. ")", 2)
    end
    local pair = states and pair_levels(s, chosen, E, U, lambda) or nil
    local out = { lambda = lambda, levels = {}, max_error = 0, pairing = pair and "overlap" or "rank" }
    local K = s:order()
    for _, lev in ipairs(chosen) do
      local val = s:at(lev, lambda)
      local ei = pair and pair[lev][1] or lev
      local err = val - E[ei]
      local row = { level = lev, series = val, exact = E[ei], exact_level = ei, error = err,
        overlap = pair and pair[lev][2] or nil }
      local info = s:info(lev)
      local aK, aK1 = s:energy(lev, K), K > 1 and s:energy(lev, K - 1) or 0
      if aK ~= 0 and aK1 ~= 0 and not info.model_space then -- a member's tail is not its plain series'
        local r = math.abs(aK / aK1 * lambda)
        if r < 0.5 then row.tail = math.abs(aK * lambda ^ K) * r / (1 - r) end
      end
      row.warning = row_warning(s, lev, info, lambda, row)
      out.levels[#out.levels + 1] = row
      if math.abs(err) > out.max_error then out.max_error = math.abs(err) end
    end
    return out
  end

  --- s:totable() -> {order=, dim=, levels={ {level=, E0=, corrections={E1..EK}, split_order=, group=}... }}
  function methods.totable(s)
    local t = { order = s:order(), dim = s:dim(), levels = {} }
    for _, lev in ipairs(s:chosen()) do
      local info = s:info(lev)
      local c = {}
      for k = 1, s:order() do c[k] = s:energy(lev, k) end
      t.levels[#t.levels + 1] = { level = lev, E0 = info.E0, corrections = c, split_order = info.split_order,
        group = info.group, min_denominator = info.min_denominator, label = s:label(lev) }
    end
    return t
  end

  meta.__tostring = function(s)
    local K = s:order()
    local lines = { string.format("perturbation series: %d states, order %d", s:dim(), K) }
    local show = math.min(K, 6)
    local labels, lw = {}, 0
    for _, lev in ipairs(s:chosen()) do
      labels[lev] = s:label(lev)
      if labels[lev] then lw = math.max(lw, math.min(#labels[lev], 24)) end
    end
    local function lab(lev)
      if lw == 0 then return "" end
      return string.format(" %-" .. lw .. "s", (labels[lev] or "-"):sub(1, lw))
    end
    local head = { string.format("%6s%s %5s %6s %14s", "level", lw > 0 and string.format(" %-" .. lw .. "s", "state") or "",
      "group", "split", "E0") }
    for k = 1, show do head[#head + 1] = string.format("%14s", "E(" .. k .. ")") end
    lines[#lines + 1] = table.concat(head, " ")
    local warn = {}
    local vn = s:vnorm()
    local lm, nf, mode, spacing = s:grouping()
    for _, lev in ipairs(s:chosen()) do
      local info = s:info(lev)
      local split = info.split_order == 0 and "-" or (info.split_order < 0 and "none" or tostring(info.split_order))
      if info.model_space then split = "near" .. info.model_space end
      local row = { string.format("%6d%s %5d %6s %14.8g", lev, lab(lev), info.group, split, info.E0) }
      for k = 1, show do
        local c = s:energy(lev, k)
        row[#row + 1] = c == c and math.abs(c) < math.huge and string.format("%14.7g", c) or string.format("%14s", "overflow")
      end
      lines[#lines + 1] = table.concat(row, " ")
      for k = 1, K do
        local c = s:energy(lev, k)
        if not (math.abs(c) < math.huge) then
          warn[#warn + 1] = string.format("  level %d: E(%d) and later are not finite (the terms overflowed);" ..
            " s:at sums to order %d at most", lev, k, k - 1)
          break
        end
      end
      local nb = neighbour_within(s, info, lm)
      if nb then
        warn[#warn + 1] = string.format("  level %d: level %d is %.3g away, coupled by %.3g, left outside a model space" ..
          " (%s): the series is unreliable at lambda = %g", lev, nb.level, nb.gap, nb.coupling,
          mode == "exact" and "groups = \"exact\"" or mode == "hand" and "hand-chosen groups"
            or "the space would pass near_max: see the note", lm)
      elseif spacing > 0 and info.min_denominator < 1e-6 * spacing then
        warn[#warn + 1] = string.format("  level %d: small denominator %.3g against the level spacing %.3g (||V|| = %.3g)",
          lev, info.min_denominator, spacing, vn)
      end
    end
    if K > show then lines[#lines + 1] = string.format("(orders %d..%d: s:energy(level, k))", show + 1, K) end
    lines[#lines + 1] = "split: order at which a degenerate level separated ('-' non-degenerate, 'none' not within the order)"
    for g, grp in ipairs(s:groups()) do
      if grp.kind == "near" then
        lines[#lines + 1] = string.format("near%d: levels %s form a model space (%s); s:at gives the eigenvalues of its" ..
          " effective Hamiltonian, the E(k) columns are their plain series", grp.model_space,
          table.concat(grp.members, ", "), grp.why)
      end
    end
    if s:notes() ~= "" then lines[#lines + 1] = "note: " .. s:notes() end
    if lw > 0 then lines[#lines + 1] = "state: the unperturbed basis state ('~': largest component of a degenerate member's combination)" end
    if #warn > 0 then
      lines[#lines + 1] = "warnings:"
      for _, w in ipairs(warn) do lines[#lines + 1] = w end
    end
    return table.concat(lines, "\n")
  end
end
