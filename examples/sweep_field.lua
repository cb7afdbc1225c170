-- Invented scenario: a spin-1 with zero-field splitting D Sz^2 in a magnetic
-- field swept from 0 to 2 D, the field tilted by a small angle from z
-- (hbar = 1, energies in units of D, field in units of D / (g muB)). Along z
-- the m = 0 and m = -1 levels would cross at B = D; the tilt mixes them into
-- an avoided crossing. The second-order perturbation series in B is drawn
-- beside the exact levels (it fails near the crossing, as it must).
--   levelshift examples/sweep_field.lua [tilt=0.05] [out=levels.csv] [plot=levels.svg]
local D = 1.0
local tilt = (params and params.tilt) or 0.05 -- radians
local s = ls.spin(1)
local H0 = D * s.Sz ^ 2
local V = math.cos(tilt) * s.Sz + math.sin(tilt) * s.Sx
local out = (params and params.out) or os.tmpname() .. ".csv"
local plot = (params and params.plot) or out:gsub("%.[^.]*$", "") .. ".svg"
local sw = ls.sweep{H0 = H0, V = V, from = 0, to = 2 * D, steps = 400, count = 3, series = 2,
                    param = "B", param_unit = "D/(g muB)", energy_unit = "D", out = out}
print(sw)
for _, c in ipairs(sw:crossings()) do
  print(string.format("%-8s at B = %.6f, gap %.3e, levels %d and %d",
    c.kind, c.at, c.gap, c.levels[1], c.levels[2]))
end
print("levels written to " .. out)
if ls.have_gnuplot() then
  sw:plot(plot, {title = "spin-1, D Sz^2, field tilted by " .. tilt .. " rad (invented)"})
  print("level diagram drawn to " .. plot)
else
  print("no picture: install gnuplot (Debian package gnuplot-nox) to draw " .. plot)
end
