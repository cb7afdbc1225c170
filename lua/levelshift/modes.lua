--- levelshift.modes (ls.force_field): molecular vibrations from a polynomial
-- potential-energy surface in dimensionless normal coordinates,
--   H = sum_i omega_i (p_i^2 + q_i^2)/2 + sum phi_ijk q_i q_j q_k + sum phi_ijkl q_i q_j q_k q_l
-- (each listed term once, with the coefficient as given: write a force field's
-- phi_ijk/6 and phi_ijkl/24 conventions into the coefficients yourself), on a
-- product of oscillators (q = (a + a^+)/sqrt(2)):
--   local ff = ls.force_field{omegas = {1388, 667, 667}, levels = 8,
--     cubic = {{1, 2, 2, -50}}, quartic = {{2, 2, 2, 2, 2}}}
--   ff.H0, ff.V3 (cubic part), ff.V4 (quartic part), ff.basis, ff.mode[i]
-- The cubic part counts as lambda and the quartic as lambda^2 in the usual
-- bookkeeping; a series in one strength (ls.perturb(H0, V3 + V4)) mixes those
-- orders. Fermi resonances (omega_1 ~ 2 omega_2) and Darling-Dennison ones
-- (2 omega_1 ~ 2 omega_2) are nearly degenerate levels of H0 coupled by V:
-- ls.perturb's model spaces take them together (docs/series.md).
return function(ls)
  local function fail(msg) error("force_field: " .. msg, 3) end

  function ls.force_field(spec)
    if type(spec) ~= "table" then fail("give a table {omegas = {...}, levels = n, cubic = {...}, quartic = {...}}") end
    local om = spec.omegas
    if type(om) ~= "table" or #om < 1 then fail("omegas must be a list of mode frequencies") end
    for i, w in ipairs(om) do
      if type(w) ~= "number" or not (w > 0) or w == math.huge then fail("omegas[" .. i .. "] must be positive") end
    end
    local L = spec.levels or 8
    if math.type(L) ~= "integer" or L < 2 or L > 2000 then fail("levels must be an integer from 2 to 2000") end
    local nm = #om
    local sites = {}
    for i = 1, nm do sites[i] = ls.oscillator(L) end
    local B = nm == 1 and sites[1] or ls.product(table.unpack(sites))
    local mode = {}
    for i = 1, nm do mode[i] = nm == 1 and B or B:site(i) end
    local H0
    for i = 1, nm do
      local t = om[i] * (mode[i].number + 0.5)
      H0 = H0 and H0 + t or t
    end
    local function terms(list, k, what)
      local V
      for t, term in ipairs(list or {}) do
        if type(term) ~= "table" or #term ~= k + 1 then
          fail(what .. "[" .. t .. "] must be {" .. ("i, "):rep(k) .. "coefficient}")
        end
        local c = term[k + 1]
        if type(c) ~= "number" or c ~= c or math.abs(c) == math.huge then
          fail(what .. "[" .. t .. "]: the coefficient must be a finite number")
        end
        local op
        for a = 1, k do
          local i = term[a]
          if math.type(i) ~= "integer" or i < 1 or i > nm then
            fail(what .. "[" .. t .. "]: mode " .. tostring(i) .. " is not from 1 to " .. nm)
          end
          op = op and op * mode[i].x or mode[i].x
        end
        V = V and V + c * op or c * op
      end
      return V or 0 * H0
    end
    local V3, V4 = terms(spec.cubic, 3, "cubic"), terms(spec.quartic, 4, "quartic")
    return { basis = B, H0 = H0, V3 = V3, V4 = V4, V = V3 + V4, mode = mode, omegas = om }
  end
end
