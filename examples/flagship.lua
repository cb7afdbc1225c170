-- Flagship demo: an invented spin-1 defect used as a magnetic field sensor.
-- Every parameter below is INVENTED for this demo (a scenario of our own):
--   zero-field splitting D = 2.740 GHz, strain term E = 0.004 GHz,
--   electron g = 2.0031, a spin-1/2 nuclear partner with isotropic
--   hyperfine A = 0.0126 GHz, a field tilted 25 degrees from the axis.
-- Energies in GHz (h = 1). H = D Sz^2 + E (Sx^2 - Sy^2) + A S.I + gamma B.S
--
-- Run: levelshift examples/flagship.lua [B=0.9e-3] [tilt=25] [plot=levels.svg]
local ls = ls or require "levelshift"

local p = { D = 2.740, E = 0.004, g = 2.0031, A = 0.0126, B = 0.9e-3, tilt = 25, sweep_tilt = 1 }
if params then for k, v in pairs(params) do p[k] = v end end
local muB_over_h = 13.996244936 -- GHz/T, mu_B/h (CODATA 2018)
local tilt = math.rad(p.tilt)

-- The model, built by index on a product basis: 3 x 2 = 6 states.
local P = ls.product(ls.spin(1), ls.spin(0.5))
local S, I = P:site(1), P:site(2)
local H0 = p.D * S.Sz ^ 2 + p.E * (S.Sx ^ 2 - S.Sy ^ 2)
         + p.A * (S.Sx * I.Sx + S.Sy * I.Sy + S.Sz * I.Sz)
-- Zeeman term per millitesla along the tilted direction: V, with lambda = B in mT.
local per_mT = p.g * muB_over_h * 1e-3
local V = per_mT * (math.sin(tilt) * S.Sx + math.cos(tilt) * S.Sz)
local B_mT = p.B * 1e3
local H = H0 + B_mT * V

local function dominant(U, k)
  local best, bi = -1, 1
  for i = 1, P:dim() do
    local re, im = U:get(i, k)
    local w = re * re + im * im
    if w > best then best, bi = w, i end
  end
  return P:describe(bi), best
end

-- 1. Exact levels at the working field.
local E, U = ls.eigen(H)
print(string.format("== 1. exact levels: invented spin-1 defect + nuclear spin 1/2, B = %.2f mT at %g deg",
  B_mT, p.tilt))
print(string.format("%5s  %14s  %14s  %s", "level", "E (GHz)", "E - E1 (MHz)", "largest component"))
for k = 1, #E do
  local name, w = dominant(U, k)
  print(string.format("%5d  %14.9f  %14.4f  %s (%.3f)", k, E[k], (E[k] - E[1]) * 1e3, name, w))
end

-- 2. Perturbation theory in the field. Without a field every level of H0 is
-- a Kramers pair (time reversal, half-integer total spin): the series finds
-- the degenerate pairs and lifts them at first order, in C. The two m = +-1
-- pairs are only 15 MHz apart while the field couples them by ~14 MHz per
-- mT: the series takes them together as one model space of nearly
-- degenerate levels and diagonalizes its effective Hamiltonian, so the
-- values hold at the working field (the plain series of each level would
-- diverge there: groups = "exact" shows it).
local K = 6
local s = ls.perturb(H0, V, { order = K })
print(string.format("\n== 2. Rayleigh-Schroedinger series in B (order %d), degenerate pairs of H0 lifted by the field", K))
for _, g in ipairs(s:groups()) do
  if g.kind == "near" then
    print(string.format("   nearly degenerate levels {%s}: one model space (%s)", table.concat(g.members, ", "), g.why))
  elseif g.kind == "exact" then
    print(string.format("   degenerate group {%s} split at order %s", table.concat(g.members, ", "),
      g.split_order and tostring(g.split_order) or "?"))
  end
end
for _, b in ipairs({ 0.05, B_mT }) do
  local c = s:check(b)
  print(string.format("   B = %.2f mT: %5s  %16s  %16s  %10s  %s", b, "level", "series (MHz)", "exact (MHz)",
    "error (Hz)", "radius (mT)"))
  for _, row in ipairs(c.levels) do
    local r = s:radius(row.level)
    print(string.format("   %14s %5d  %16.6f  %16.6f  %10.3g  %s%s", "", row.level, row.series * 1e3,
      row.exact * 1e3, row.error * 1e9, r and string.format("%.3g", r) or "-",
      (r and r < b) and "  <- B beyond the radius: series diverges, use exact" or ""))
  end
end

-- 3. Field sweep along a nearly aligned axis (sweep_tilt): the m = 0 and
-- m = -1 levels meet near D / (g muB) ~ 98 mT; the small transverse field
-- component turns the meeting into an avoided crossing (the sensor's level
-- anticrossing).
local st = math.rad(p.sweep_tilt)
local Vs = per_mT * (math.sin(st) * S.Sx + math.cos(st) * S.Sz)
local sw = ls.sweep{ H0 = H0, V = Vs, from = 0, to = 150, steps = 300, series = 2,
  param = "B", param_unit = "mT", energy_unit = "GHz" }
print(string.format("\n== 3. field sweep 0..150 mT at %g deg (300 steps), levels followed by overlap", p.sweep_tilt))
for _, c in ipairs(sw:crossings()) do
  if c.kind == "avoided" and c.gap > 1e-4 then
    print(string.format("   avoided crossing of levels %d and %d at %.3f mT, minimum gap %.3f MHz",
      c.levels[1], c.levels[2], c.at, c.gap * 1e3))
  end
end
local nc = 0
for _, c in ipairs(sw:crossings()) do if c.kind == "crossing" then nc = nc + 1 end end
print(string.format("   %d true crossings of uncoupled levels kept as crossings", nc))
if p.plot and sw.plot then
  sw:plot(p.plot, { title = "invented spin-1 defect: exact levels (solid), 2nd-order series (dashed)" })
  print("   level diagram written to " .. p.plot)
end

-- 4. A microwave pulse drives the sensor from level 1 (m = 0) into the
-- m = -1 manifold: first order beside exact propagation. hbar = 1 needs
-- angular units: energies x 2 pi in rad/ns, times in ns.
local two_pi = 2 * math.pi
local Hrad = two_pi * H
local Er = ls.eigen(Hrad)
local target = 3
local omega = Er[target] - Er[1]
local drive = two_pi * 0.001 * S.Sx -- invented 1 MHz drive strength
for _, width in ipairs({ 10, 30 }) do
  local pulse = ls.pulse.sine{ amplitude = 1, omega = omega, phase = 0,
    envelope = ls.pulse.gaussian{ amplitude = 1, center = 0, width = width } }
  local tr = ls.transition{ H0 = Hrad, V = drive, pulse = pulse, from = 1,
    t0 = -math.huge, t1 = math.huge, order = 1 }
  local ex = tr:exact()
  if width == 10 then
    print(string.format("\n== 4. resonant Gaussian microwave pulse 1 -> %d (carrier %.4f GHz)", target,
      omega / two_pi))
    print(string.format("   %10s  %5s  %14s  %14s", "width (ns)", "to", "P first order", "P exact"))
  end
  for to = 2, 4 do
    local p1 = tr:probability(to)
    -- a first-order probability at rounding level means "forbidden at first
    -- order": the exact propagation then shows the higher-order path
    local first = p1 < 1e-30 and string.format("%14s", "0 (forbidden)") or string.format("%14.6e", p1)
    print(string.format("   %10g  %5d  %s  %14.6e", width, to, first, ex:probability(to)))
  end
  if tr:warnings() ~= "" then print("   warning: " .. tr:warnings()) end
end
