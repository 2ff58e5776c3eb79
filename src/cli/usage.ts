/** Usage texts of the command line (kept apart so --help loads no engine code). */
export const FIT_USAGE = `usage: offsetry fit --model NOMINAL.json --data SESSION.csv --out CALIBRATED.json
                   [--report REPORT.json] [--holdout 0.2] [--seed 1] [--allow-outside-limits]
                   [--length-bound 5] [--angle-bound 1] [--noise 0.05] [--tool-fixture]

  --model      nominal arm geometry (offsetry-arm/1 JSON)
  --data       measurement session (CSV: pose,q1..qn,x,y,z[,split])
  --out        calibrated geometry to write (same format, base and tool filled in)
  --report     fit report to write (JSON)
  --holdout    fraction of poses held out for validation when the session has no split
               column (default 0.2; 0 = none)
  --seed       seed of the hold-out draw (default 1)
  --allow-outside-limits   accept joint readings outside the model's limits
  --length-bound, --angle-bound   plausible change from nominal (mm, deg; default 5, 1)
  --noise      the instrument's stated noise, mm per coordinate (default 0.05)
  --tool-fixture   the tool is a fixed fixture: judge its point too

  Prints the plausibility verdicts (the rules the product applies to every fit) and exits with
  status 3 when the fit is implausible (the files are still written).`;

export const CHECK_USAGE = `usage: offsetry check --model GEOMETRY.json --data SESSION.csv [--allow-outside-limits]

  Prints the 3-D error of the geometry's predicted points against the measured ones.
  When the geometry has no base frame, the measurement frame is first registered to it.`;

export const PLAN_USAGE = `usage: offsetry plan --model GEOMETRY.json --count 60 --out POSES.csv [--seed N] [--index O1|O3|O4]

  Picks --count joint configurations within the joint limits that maximise an observability
  index (default O1) for the default parameter set, and writes them as CSV (pose,q1..qn).`;
