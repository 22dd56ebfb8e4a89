"""test_multi_localizer.py - several localizers in one study equal single-localizer studies run apart.

On a simulated study (simulate --subjects 3), one study file with three
localizers (INTERFACE.md "Several localizers"):
  hearing  task tones,  melody - scrambled, odd-even, top 10 percent
  pitch    task tones,  melody alone, leave-one-out, top 20 voxels (same task, other contrast)
  seeing   task memory, familiar - novel, odd-even, top 20 percent
with [measure memory] in hearing and pitch and [measure tonesin] (task tones,
a localizer's task) in seeing's fROIs, is analyzed once. The same study is
also written as three single-localizer files (hearing unnamed, pitch and seeing
named) and each is analyzed apart. Then:
1. every row of responses.csv, reliability.csv, timecourses.csv (combined and
   per subject), group.csv, reliability_group.csv and timecourses_group.csv
   whose localizer is X equals, as CSV text to the last digit, the row of X's
   own run (its localizer column: the task label 'tones' for the unnamed form);
   group.csv as a set of rows (its order follows first appearance across the table);
2. run.json lists each run once per task (tones 4 runs, memory 2), so each was
   fitted once, and names each localizer's parcels;
3. the maps of localizer X carry X in desc- (desc-<X><split>) and hold the
   same voxels as the single run's maps (desc-<split>);
4. the report has a heading per localizer; check lists every localizer's
   splits and finds a typo in a later localizer's contrast; a later
   localizer's parcel table counts for freshness; parcels refuses several
   localizers; fit --task finds a later localizer's effects;
5. a bad study (named and unnamed localizers mixed) stops analyze with the
   file and line, before any output folder is made.
"""
import csv
import json
import os
import shutil
import subprocess
import sys
import tempfile
from tap import done, ok


try:
    import nibabel as nib
    import numpy as np
except ImportError as exc:  # the python3 first on PATH may lack them
    print("skip - numpy/nibabel unavailable: %s" % exc)
    sys.exit(0)

SPLITROI = os.environ.get("SPLITROI", "build/splitroi")


def run(*args):
    p = subprocess.run([SPLITROI] + list(args), capture_output=True, text=True)
    return p.returncode, p.stdout + p.stderr


def rows(path):
    with open(path, newline="") as f:
        r = list(csv.reader(f))
    return r[0], r[1:]


HL = "task = tones\ncontrast = melody - scrambled\nsplit = odd-even\neffects = melody, scrambled, melody - scrambled\n"
HP = "image = parcels.nii.gz\nnames = parcels.tsv\ntop_percent = 10\n"
PL = "task = tones\ncontrast = melody\nsplit = leave-one-out\neffects = melody, scrambled\n"
PP = "image = parcels.nii.gz\nnames = parcels.tsv\ntop_voxels = 20\n"
SL = "task = memory\ncontrast = familiar - novel\nsplit = odd-even\neffects = familiar, novel\n"
SP = "image = parcels.nii.gz\nnames = parcels.tsv\ntop_percent = 20\n"
MM = "[measure memory]\ntask = memory\neffects = familiar, novel, familiar - novel\n"
MT = "[measure tonesin]\ntask = tones\neffects = melody - scrambled, melody\n"


def named(name, loc, par):
    return "[localizer %s]\n%s\n[parcels %s]\n%s\n" % (name, loc, name, par)


def main():
    tmp = tempfile.mkdtemp(prefix="sr_multi.")
    sim = os.path.join(tmp, "sim")
    rc, out = run("simulate", "--out", sim, "--subjects", "3", "--volumes", "80", "--quiet")
    if not ok(rc == 0, "simulate a study"):
        print(out)
        return
    base = open(os.path.join(sim, "study.ini")).read()
    head = base.split("[localizer]")[0]
    model = "[model]" + base.split("[model]")[1].split("[measure memory]")[0]

    def study(name, text):
        path = os.path.join(sim, name + ".ini")
        with open(path, "w") as f:
            f.write(head.replace("out = results", "out = res_" + name) + text)
        return path

    # seeing's parcel names from a copy of the table, so that a change to it alone can be made below
    with open(os.path.join(sim, "parcels.tsv")) as f, open(os.path.join(sim, "parcels_seeing.tsv"), "w") as g:
        g.write(f.read())
    multi = study("multi", named("hearing", HL, HP) + named("pitch", PL, PP) +
                  named("seeing", SL, SP.replace("parcels.tsv", "parcels_seeing.tsv")) +
                  model + MM + "localizers = hearing pitch\n" + MT + "localizers = seeing\n")
    singles = {
        "hearing": (study("hearing", "[localizer]\n" + HL + "\n[parcels]\n" + HP + "\n" + model + MM), "tones"),
        "pitch": (study("pitch", named("pitch", PL, PP) + model + MM), "pitch"),
        "seeing": (study("seeing", named("seeing", SL, SP) + model + MT), "seeing"),
    }
    for name, path in [("multi", multi)] + [(k, v[0]) for k, v in sorted(singles.items())]:
        rc, out = run("analyze", "--quiet", path)
        if not ok(rc == 0, "analyze the %s study" % name):
            print(out)
            return
    mres = os.path.join(sim, "res_multi")

    # 1. rows equal to the last digit
    tables = ["responses.csv", "reliability.csv", "timecourses.csv", "group.csv", "reliability_group.csv",
              "timecourses_group.csv"]
    for sub in ("01", "02", "03"):
        tables += ["sub-%s/responses.csv" % sub, "sub-%s/reliability.csv" % sub, "sub-%s/timecourses.csv" % sub]
    for table in tables:
        hm, rm = rows(os.path.join(mres, table))
        li = hm.index("localizer") if "localizer" in hm else -1
        ok(li >= 0, "%s of the several-localizer study has a localizer column" % table)
        seen = set()
        for name, (path, single_label) in sorted(singles.items()):
            hs, rs = rows(os.path.join(sim, "res_" + name, table))
            if not ok(hs == hm, "%s: same columns as %s's run" % (table, name)):
                continue
            mine = [r for r in rm if r[li] == name]
            theirs = [r[:li] + [name if r[li] == single_label else "?" + r[li]] + r[li + 1:] for r in rs]
            if table == "group.csv":
                same = sorted(mine) == sorted(theirs)
            else:
                same = mine == theirs
            ok(len(mine) > 0 and same,
               "%s: the %d rows of localizer %s equal %s's own run's %d rows" % (table, len(mine), name, name,
                                                                                len(theirs)))
            seen.add(name)
        ok(all(r[li] in seen for r in rm), "%s: every row belongs to one of the three localizers" % table)

    # 2. each run fitted once
    for sub in ("01", "02", "03"):
        rec = json.load(open(os.path.join(mres, "sub-" + sub, "run.json")))
        runs = {task: [r["run"] for r in v] for task, v in rec["inputs"].items()}
        bolds = [r["bold"] for v in rec["inputs"].values() for r in v]
        ok(runs == {"tones": ["1", "2", "3", "4"], "memory": ["1", "2"]} and len(bolds) == len(set(bolds)),
           "sub-%s: run.json lists each of the 6 runs once (%s)" % (sub, runs))
        ok(sorted(rec.get("localizer_parcels", {})) == ["hearing", "pitch", "seeing"],
           "sub-%s: run.json names each localizer's parcels" % sub)

    # 3. maps carry the localizer in desc- and equal the single runs' maps
    func = os.path.join(mres, "sub-01", "func")
    pairs = [("hearing", "tones", "oddevenA"), ("hearing", "tones", "allmemory"),
             ("pitch", "tones", "leaveoneout3"), ("seeing", "memory", "oddevenB"),
             ("seeing", "memory", "alltones")]
    for name, task, split in pairs:
        for kind in ("tstat", "dseg"):
            m = os.path.join(func, "sub-01_task-%s_desc-%s%s_%s.nii.gz" % (task, name, split, kind))
            s = os.path.join(sim, "res_" + name, "sub-01", "func", "sub-01_task-%s_desc-%s_%s.nii.gz" %
                             (task, split, kind))
            if not ok(os.path.exists(m) and os.path.exists(s), "map %s exists (and its single-run twin)" %
                      os.path.basename(m)):
                continue
            a = np.asarray(nib.load(m).dataobj)
            b = np.asarray(nib.load(s).dataobj)
            ok(a.shape == b.shape and np.array_equal(np.nan_to_num(a, nan=-12345), np.nan_to_num(b, nan=-12345)),
               "%s equals the single run's desc-%s_%s" % (os.path.basename(m), split, kind))
    one = os.path.join(sim, "res_hearing", "sub-01", "func")
    ok(os.path.exists(os.path.join(one, "sub-01_task-tones_desc-oddevenA_tstat.nii.gz")),
       "a one-localizer study keeps its map names (desc-<split>)")

    # the report: a heading per localizer in each section it draws (responses, measured tasks, time courses)
    html = open(os.path.join(mres, "report.html")).read()
    for name in ("hearing", "pitch", "seeing"):
        ok(html.count('<h3 class="localizer">Localizer %s</h3>' % name) == 3,
           "the report has localizer %s's headings (cross-validated, measured, time courses)" % name)
    one = open(os.path.join(sim, "res_hearing", "report.html")).read()
    ok('class="localizer"' not in one, "a one-localizer report has no localizer headings")

    # check lists every localizer's splits and checks each one's contrast
    rc, out = run("check", multi)
    ok(rc == 0 and "localizer hearing splits (odd-even)" in out and "localizer pitch splits (leave-one-out)" in out
       and "localizer seeing splits (odd-even)" in out and "sub-02 leave-one-out:3: define on runs 1+2+4" in out,
       "check lists the splits of every localizer")
    typo = study("typo", "[localizer hearing]" + open(multi).read().split("[localizer hearing]", 1)[1].replace(
        "contrast = familiar - novel", "contrast = familiar - nvel"))
    rc, out = run("check", typo)
    ok(rc != 0 and "names condition 'nvel'" in out and typo + ": line" in out,
       "check finds an unknown condition in a later localizer's contrast, naming the line")

    # a later localizer's parcels count for the freshness of a subject's results
    rc, out = run("analyze", multi)
    ok(rc == 0 and out.count("up to date, skipped") == 3, "a second analyze skips the 3 complete subjects")
    names = open(os.path.join(sim, "parcels_seeing.tsv")).read()
    with open(os.path.join(sim, "parcels_seeing.tsv"), "w") as f:
        f.write(names.replace("occipital_control", "occipital_other"))
    rc, out = run("analyze", multi)
    hm, rm = rows(os.path.join(mres, "responses.csv"))
    li, pi = hm.index("localizer"), hm.index("parcel")
    ok(rc == 0 and "up to date" not in out and
       any(r[li] == "seeing" and r[pi] == "occipital_other" for r in rm) and
       not any(r[li] != "seeing" and r[pi] == "occipital_other" for r in rm),
       "after seeing's parcel table changes, analyze redoes the subjects and only seeing's rows change name")

    # the parcels command refuses a study of several localizers (which one's maps?); fit finds a later one's effects
    rc, out = run("parcels", multi, "--out", os.path.join(tmp, "pp"))
    ok(rc != 0 and "has 3 localizers" in out and not os.path.exists(os.path.join(tmp, "pp", "parcels.nii.gz")),
       "parcels on a several-localizer study fails saying why")
    two = study("fitonly", named("hearing", HL, HP) +
                named("seeing", SL.replace("effects = familiar, novel", "effects = novel - familiar"), SP) + model)
    rc, out = run("fit", "--study", two, "--subject", "01", "--task", "memory", "--out", os.path.join(tmp, "fit"),
                  "--quiet")
    made = sorted(os.listdir(os.path.join(tmp, "fit"))) if os.path.isdir(os.path.join(tmp, "fit")) else []
    ok(rc == 0 and "sub-01_task-memory_desc-novelMinusFamiliar_effect.nii.gz" in made,
       "fit --task of a later localizer fits its effects (%s)" % out.strip()[:120])

    # 5. a bad study stops before any output
    bad = study("bad", named("hearing", HL, HP) + "[localizer]\n" + SL + "\n" + model)
    rc, out = run("analyze", "--quiet", bad)
    ok(rc != 0 and bad + ": line" in out and "cannot be mixed" in out,
       "named and unnamed localizers mixed: analyze fails naming the file and line (%s)" % out.strip()[:160])
    ok(not os.path.exists(os.path.join(sim, "res_bad")), "and makes no output folder")
    rc, out = run("check", bad)
    ok(rc != 0 and "cannot be mixed" in out, "check reports it too")
    shutil.rmtree(tmp, ignore_errors=True)


main()
done()
