/** Usage texts of the command line (kept apart so --help loads no engine code). */
export const FIT_USAGE = `usage: offsetry fit --model NOMINAL.json --data SESSION.csv --out CALIBRATED.json
                   [--report REPORT.json] [--holdout 0.2] [--seed 1] [--allow-outside-limits]

  --model      nominal arm geometry (offsetry-arm/1 JSON)
  --data       measurement session (CSV: pose,q1..qn,x,y,z[,split])
  --out        calibrated geometry to write (same format, base and tool filled in)
  --report     fit report to write (JSON)
  --holdout    fraction of poses held out for validation when the session has no split
               column (default 0.2; 0 = none)
  --seed       seed of the hold-out draw (default 1)
  --allow-outside-limits   accept joint readings outside the model's limits`;

export const CHECK_USAGE = `usage: offsetry check --model GEOMETRY.json --data SESSION.csv [--allow-outside-limits]

  Prints the 3-D error of the geometry's predicted points against the measured ones.
  When the geometry has no base frame, the measurement frame is first registered to it.`;

export const PLAN_USAGE = `usage: offsetry plan --model GEOMETRY.json --count 60 --out POSES.csv [--seed N] [--index O1|O3|O4]

  Picks --count joint configurations within the joint limits that maximise an observability
  index (default O1) for the default parameter set, and writes them as CSV (pose,q1..qn).`;

export const COMPENSATE_USAGE = `usage: offsetry compensate --model CALIBRATED.json --nominal NOMINAL.json --targets TARGETS.csv --out OUT.csv
                          [--frame base|measurement] [--tool x,y,z,rx,ry,rz]

  Corrects a robot program for a calibrated geometry: for every target, the joint values that bring the
  calibrated arm onto it, and the target the nominal model needs to drive to those joint values.
  --model      calibrated geometry (offsetry-arm/1 JSON, e.g. from offsetry fit)
  --nominal    the arm model's nominal geometry (the controller's model)
  --targets    program (CSV: target,x,y,z[,rx,ry,rz][,q1..qn] or target,q1..qn)
  --out        compensated program to write (CSV: target,q1..qn,x,y,z,rx,ry,rz,status,message)
  --frame      frame of the targets: base (robot base, default) or measurement (tracker frame of the fit)
  --tool       tool centre point in the flange frame (mm, deg), replacing both geometries' tools`;
