"""Seeded mutation fuzzer for splitroi's input readers: breaks one input file of a valid study at a time and flags crashes, hangs and unclear errors.

Usage: fuzz_inputs.py --study DIR/study.ini [--study ...] --bin SPLITROI [--seed N]
                      [--budget SECONDS] [--iterations N] [--timeout S] [--keep DIR]
Each iteration copies one seed study, mutates one file (NIfTI header bytes, gzip
stream, parcel labels, events/confounds TSV cells, JSON sidecars, the study INI),
runs `check STUDY` and `analyze STUDY --quiet --no-report --out OUT`, and flags:
a sanitizer report, an exit status other than 0/1/2, a signal, a timeout, exit 1
whose message names no file, exit 0 after a mutation that surely made the input
invalid, and temporary files left in the output folder after a failure.
Prints one line per finding and a summary; exits 1 if anything was flagged.
Every random draw comes from random.Random(seed), so a run is reproducible.
"""
import argparse
import gzip
import json
import os
import random
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import time

HDR = 348
INT16_VALUES = [0, 1, -1, 2, 3, 4, 7, 8, 9, 255, 256, 32767, -32768, 1000, 10000]
FLOAT_VALUES = [0.0, -0.0, 1.0, -1.0, 2.0, 0.5, 1e-30, 1e30, 3.4e38, -3.4e38, 1e-45,
                float('nan'), float('inf'), float('-inf'), 348.0, 352.0, 351.5, 1e9]
DATATYPES = [0, 1, 2, 4, 8, 16, 32, 64, 128, 256, 512, 768, 1024, 1280, 1536, 1792, 2048,
             2304, 3, 5, 99, -1, 32767]
CELL_VALUES = ['', 'n/a', 'N/A', '1e309', '-1e309', 'NaN', 'nan', 'inf', '-inf', '-1', '-0',
               '0', '1e300', '99999999999999999999999', '-5', '0x10', '1,5', '"3"', '"',
               '\r', '3\r', '\x00', '1\x002', '\ufeff1', '\ufeff', ' ', '  2  ', 'melody',
               'é', '\u00a0', '1e-320', '+', '.', 'e5', '1..2', '\t', 'x' * 5000]
JSON_TR = ['"2"', '-2', '0', '1e308', '1e-12', 'null', '[]', '{}', 'true', 'NaN', '2.0.0',
           '"two"', '-0', '1e400', '"2', '']


class Mut:
    """One mutation: the file it touched, what it did, whether the input is surely invalid now."""

    def __init__(self, path, desc, invalid=False):
        self.path, self.desc, self.invalid = path, desc, invalid


def read_nii(path):
    with open(path, 'rb') as f:
        raw = f.read()
    gz = path.endswith('.gz')
    return (gzip.decompress(raw) if gz else raw), gz


def write_nii(path, data, gz):
    if gz:
        data = gzip.compress(data, compresslevel=1, mtime=0)
    with open(path, 'wb') as f:
        f.write(data)


def mutate_nifti_header(rng, path):
    data, gz = read_nii(path)
    b = bytearray(data)
    choice = rng.randrange(14)
    fields = {
        0: ('sizeof_hdr', 0, 'i', [0, 540, -1, 347, 349], True),
        1: ('dim', 40 + 2 * rng.randrange(8), 'h', INT16_VALUES, None),
        2: ('datatype', 70, 'h', DATATYPES, None),
        3: ('bitpix', 72, 'h', [0, 1, 7, 8, 16, 32, 64, 128, -8, 12], None),
        4: ('pixdim', 76 + 4 * rng.randrange(8), 'f', FLOAT_VALUES, None),
        5: ('vox_offset', 108, 'f', FLOAT_VALUES + [1e6, 4e9], None),
        6: ('scl_slope', 112, 'f', FLOAT_VALUES, None),
        7: ('scl_inter', 116, 'f', FLOAT_VALUES, None),
        8: ('qform_code', 252, 'h', [0, 1, 2, 3, 4, 5, -1, 32767], None),
        9: ('sform_code', 254, 'h', [0, 1, 2, 3, 4, 5, -1, 32767], None),
        10: ('quatern', 256 + 4 * rng.randrange(6), 'f', FLOAT_VALUES, None),
        11: ('srow', 280 + 4 * rng.randrange(12), 'f', FLOAT_VALUES, None),
    }
    if choice in fields:
        name, off, fmt, values, invalid = fields[choice]
        v = rng.choice(values)
        struct.pack_into('<' + fmt, b, off, v)
        desc = 'header %s@%d = %r' % (name, off, v)
        inv = bool(invalid)
        if name == 'dim' and off == 40 and v in (0, -1, 9, 255, 256, 32767, -32768, 1000, 10000):
            inv = True
        if name == 'datatype' and v in (0, 3, 5, 99, -1, 32767):
            inv = True
        if name == 'vox_offset' and (v != v or v in (float('inf'), float('-inf'), 1e30, 3.4e38,
                                                       -3.4e38, -1.0, 1e9, 1e6, 4e9)):
            inv = True
    elif choice == 12:
        magic = rng.choice([b'n+2\0', b'ni1\0', b'\0\0\0\0', b'XXXX', b'n+1X'])
        b[344:348] = magic
        desc, inv = 'magic = %r' % magic, magic != b'ni1\0' or not path.endswith(('.hdr', '.img'))
    else:
        n = rng.choice([0, 1, 4, 40, 100, 347, 348, 351, 352 + rng.randrange(max(1, len(b) - 352))])
        b = b[:n]
        desc, inv = 'truncated to %d of %d bytes' % (n, len(data)), True
    write_nii(path, bytes(b), gz)
    return Mut(path, desc, inv)


def mutate_bold_data(rng, path):
    import nibabel as nib
    import numpy as np
    img = nib.load(path)
    d = np.asarray(img.dataobj).astype(np.float32)
    choice = rng.randrange(5)
    idx = tuple(rng.randrange(s) for s in d.shape)
    if choice == 0:
        d[idx] = np.nan
        desc = 'voxel %s = NaN' % (idx,)
    elif choice == 1:
        d[idx] = rng.choice([np.inf, -np.inf, 3.4e38])
        desc = 'voxel %s = %r' % (idx, float(d[idx]))
    elif choice == 2:
        d[...] = 0
        desc = 'all voxels 0'
    elif choice == 3:
        d = d[..., :rng.choice([1, 2, 3])]
        desc = 'kept %d volumes' % d.shape[-1]
    else:
        d = d[:, :, :-1]
        desc = 'one slice fewer'
    out = nib.Nifti1Image(d, img.affine, img.header)
    out.set_data_dtype(np.float32)
    out.header['scl_slope'] = 1
    out.header['scl_inter'] = 0
    nib.save(out, path)
    # fewer volumes than the events/confounds expect, or another grid, is caught;
    # NaN/inf voxels are left out of the analysis by METHODS.md: no verdict
    return Mut(path, desc, choice == 4)


def mutate_gzip_stream(rng, path):
    with open(path, 'rb') as f:
        raw = bytearray(f.read())
    if rng.random() < 0.5:
        k = rng.randrange(1, 4)
        where = []
        for _ in range(k):
            i = rng.randrange(len(raw))
            raw[i] ^= 1 << rng.randrange(8)
            where.append(i)
        desc = 'gzip stream: flipped bits at %s' % where
        inv = False  # a flip can land in the mtime or a don't-care bit
        # a corrupt deflate stream or checksum must be caught
        try:
            gzip.decompress(bytes(raw))
        except Exception:
            inv = True
    else:
        n = rng.randrange(len(raw))
        raw = raw[:n]
        desc, inv = 'gzip stream cut at %d of %d' % (n, len(raw)), True
    with open(path, 'wb') as f:
        f.write(bytes(raw))
    return Mut(path, desc, inv)


def mutate_parcels(rng, path):
    import nibabel as nib
    import numpy as np
    img = nib.load(path)
    d = np.asarray(img.dataobj).astype(np.float64)
    choice = rng.randrange(7)
    idx = tuple(rng.randrange(s) for s in d.shape[:3])
    dtype = np.float32
    if choice == 0:
        d[idx] = 1.5
        desc, inv = 'parcel voxel %s = 1.5 (non-integer label)' % (idx,), True
    elif choice == 1:
        d[idx] = np.nan
        desc, inv = 'parcel voxel %s = NaN' % (idx,), True
    elif choice == 2:
        d[idx] = -3
        desc, inv, dtype = 'parcel voxel %s = -3' % (idx,), True, np.int32
    elif choice == 3:
        v = rng.choice([1e9, 2.0 ** 31, 1e30, 65536, 2.0 ** 24 + 1, 2.0 ** 31 - 1])
        d[idx] = v
        # whole numbers that fit a 32-bit label are fine; larger ones are not labels
        desc, inv, dtype = 'parcel voxel %s = %r' % (idx, v), v > 2.0 ** 31 - 1, np.float64
    elif choice == 4:
        d = np.stack([d, d], axis=-1)
        desc, inv = 'parcels made 4-D with 2 volumes', True
    elif choice == 5:
        d[...] = 0
        desc, inv = 'parcels all zero', True
    else:
        d[idx] = np.inf
        desc, inv = 'parcel voxel %s = inf' % (idx,), True
    out = nib.Nifti1Image(d.astype(dtype), img.affine, img.header)
    out.set_data_dtype(dtype)
    out.header['scl_slope'] = 1
    out.header['scl_inter'] = 0
    nib.save(out, path)
    return Mut(path, desc, inv)


def mutate_tsv(rng, path, kind):
    with open(path, 'rb') as f:
        text = f.read().decode('utf-8', 'surrogateescape')
    lines = text.split('\n')
    if lines and lines[-1] == '':
        lines = lines[:-1]
    if not lines:
        lines = ['']
    choice = rng.randrange(10)
    inv = False
    if choice < 5:
        r = rng.randrange(len(lines))
        cells = lines[r].split('\t')
        c = rng.randrange(len(cells))
        v = rng.choice(CELL_VALUES)
        old = cells[c]
        skipped = len(cells) > 2 and cells[2] == 'n/a'   # a row already skipped for its trial_type
        cells[c] = v
        lines[r] = '\t'.join(cells)
        desc = 'line %d column %d: %r -> %r' % (r + 1, c + 1, old[:20], v[:20])
        # a non-number in the onset or duration of an events row is surely invalid
        if kind == 'events' and r > 0 and c < 2 and not skipped and v in ('1e309', '-1e309', 'NaN', 'nan', 'inf',
                                                         '-inf', 'melody', '0x10', '1,5', '"',
                                                         'e5', '1..2', '.', '+'):
            inv = True
    elif choice == 5:
        r = rng.randrange(len(lines))
        lines[r] = lines[r] + '\t' * rng.randrange(1, 3)
        desc = 'line %d: extra tab(s)' % (r + 1)
    elif choice == 6:
        r = rng.randrange(len(lines))
        i = lines[r].find('\t')
        if i >= 0:
            lines[r] = lines[r][:i] + lines[r][i + 1:]
        # short rows are padded with empty cells (table.h): the verdict depends on what moved
        desc = 'line %d: a tab removed' % (r + 1)
    elif choice == 7:
        r = rng.randrange(len(lines))
        junk = rng.choice(['\r', '\x00', '\ufeff', '"', "'", '\x1b', '\udcff'])
        p = rng.randrange(len(lines[r]) + 1)
        lines[r] = lines[r][:p] + junk + lines[r][p:]
        desc = 'line %d col %d: inserted %r' % (r + 1, p, junk)
    elif choice == 8:
        r = rng.randrange(len(lines))
        n = rng.choice([5000, 70000, 1 << 20])
        lines.insert(r, 'x' * n if rng.random() < 0.5 else '\t'.join(['1'] * (n // 2)))
        desc = 'line %d: inserted a line of %d bytes' % (r + 1, n)
        inv = r > 0 or kind == 'events'
    else:
        op = rng.randrange(4)
        if op == 0:
            lines = []
            desc, inv = 'emptied', True
        elif op == 1:
            lines = lines[:1]
            desc = 'header only'
        elif op == 2:
            lines = lines[1:]
            desc, inv = 'header removed', True
        else:
            n = rng.randrange(len(text) + 1)
            with open(path, 'wb') as f:
                f.write(text[:n].encode('utf-8', 'surrogateescape'))
            return Mut(path, 'cut at byte %d' % n)
    with open(path, 'wb') as f:
        f.write(('\n'.join(lines) + ('\n' if lines else '')).encode('utf-8', 'surrogateescape'))
    return Mut(path, desc, inv)


def mutate_json(rng, path):
    with open(path, 'rb') as f:
        text = f.read().decode('utf-8', 'surrogateescape')
    choice = rng.randrange(4)
    if choice == 0 and 'RepetitionTime' in text:
        v = rng.choice(JSON_TR)
        text = re.sub(r'("RepetitionTime"\s*:\s*)[^,}\n]*', lambda m: m.group(1) + v, text)
        desc = 'RepetitionTime = %r' % v
        inv = v not in ('1e-12',)   # a tiny TR is odd but not malformed
        return _write_text(path, text, desc, inv)
    if choice == 1:
        n = rng.randrange(len(text))
        return _write_text(path, text[:n], 'cut at byte %d' % n, True)
    if choice == 2:
        p = rng.randrange(len(text) + 1)
        junk = rng.choice(['{', '}', ',', '"', '\x00', 'xyz', ']', ':', '\ufeff'])
        text = text[:p] + junk + text[p:]
        return _write_text(path, text, 'inserted %r at %d' % (junk, p), not _is_json(text))
    v = rng.choice(['[]', '"x"', '1', 'null', '{"RepetitionTime": 2, "RepetitionTime": -1}',
                    '{"RepetitionTime": 1e999}', '{}'])
    return _write_text(path, v, 'replaced by %r' % v, v not in ('{}',))


def _is_json(text):
    try:
        json.loads(text)
        return True
    except ValueError:
        return False


def _write_text(path, text, desc, inv):
    # only the run sidecars are read; dataset_description.json is BIDS's business
    if not path.endswith('_bold.json'):
        inv = False
    with open(path, 'wb') as f:
        f.write(text.encode('utf-8', 'surrogateescape'))
    return Mut(path, desc, inv)


def mutate_ini(rng, path):
    with open(path, 'rb') as f:
        lines = f.read().decode('utf-8', 'surrogateescape').split('\n')
    kv = [i for i, l in enumerate(lines) if '=' in l and not l.lstrip().startswith((';', '#'))]
    secs = [i for i, l in enumerate(lines) if l.strip().startswith('[')]
    choice = rng.randrange(11)
    inv = False
    if choice >= 9:
        # the layout and model keys of BIDS Derivatives studies (issue 13), sane and not
        sec, opts = rng.choice([
            ('[study]', [('derivatives = data', False), ('derivatives = /nonexistent', True),
                         ('space = MNI152NLin2009cAsym', True), ('space = a-b', True),
                         ('desc = preproc', True), ('res = 2', True), ('mask = auto', True),
                         ('mask = m_{subject}.nii.gz', False)]),
            ('[model]', [('skip_volumes = 3', False), ('skip_volumes = 100000', True),
                         ('skip_volumes = -1', True), ('skip_volumes = 1.5', True),
                         ('censor_fd = 0.5', False), ('censor_fd = 0', True), ('censor_fd = nan', False),
                         ('censor_fd = 1e309', False), ('confounds = *', False), ('confounds = [', False),
                         ('confounds = motion_* motion_tx', False)])])
        line, inv = rng.choice(opts)
        at = [i for i in secs if lines[i].strip() == sec]
        i = (at[0] + 1) if at else len(lines)
        if not at:
            lines.append(sec)
            i = len(lines)
        lines.insert(i, line)
        with open(path, 'wb') as f:
            f.write('\n'.join(lines).encode('utf-8', 'surrogateescape'))
        return Mut(path, 'line %d: %s' % (i + 1, line), inv)
    elif choice < 3 and kv:
        i = rng.choice(kv)
        key = lines[i].split('=', 1)[0]
        v = rng.choice(['', 'n/a', '-1', '0', '1e309', 'NaN', '\x00', 'all all', '../../../x',
                        '/nonexistent', 'melody -', '* 2', '1e-400', '((a', 'x' * 5000,
                        'melody - melody', '100', '101', '-0', 'inf', '   ', 'abc def'])
        lines[i] = key + '= ' + v
        desc = 'line %d: %s= %r' % (i + 1, key.strip(), v[:20])
    elif choice == 3 and secs:
        i = rng.choice(secs)
        j = i + 1
        while j < len(lines) and not lines[j].strip().startswith('['):
            j += 1
        lines = lines + lines[i:j]
        desc, inv = 'duplicated section %s' % lines[i].strip(), True
    elif choice == 4:
        i = rng.randrange(len(lines) + 1)
        junk = ''.join(chr(rng.randrange(256)) for _ in range(rng.randrange(1, 40)))
        lines.insert(i, junk)
        desc = 'line %d: inserted binary junk' % (i + 1)
    elif choice == 5:
        i = rng.randrange(len(lines) + 1)
        n = rng.choice([300, 5000, 70000])
        lines.insert(i, rng.choice(['x', 'key = ', ';']) + 'y' * n)
        desc = 'line %d: inserted a line of %d bytes' % (i + 1, n)
    elif choice == 6 and secs:
        i = rng.choice(secs) + 1
        lines.insert(i, rng.choice(['colour = blue', 'tr = 2', 'Task = tones', 'subject = 01']))
        desc, inv = 'line %d: unknown key' % (i + 1), True
    elif choice == 7 and lines:
        i = rng.randrange(len(lines))
        old = lines[i]
        del lines[i]
        desc = 'deleted line %d %r' % (i + 1, old[:30])
    else:
        i = rng.choice(secs) if secs else 0
        old = lines[i] if lines else ''
        lines[i:i + 1] = [rng.choice(['[study', 'study]', '[]', '[measure]', '[model',
                                       '[ study ]', '[measure memory] x'])]
        desc = 'line %d: section header %r -> %r' % (i + 1, old, lines[i])
    return _write_text(path, '\n'.join(lines), desc, inv)


def pick_target(rng, root):
    files = []
    for d, _, names in os.walk(root):
        for n in names:
            files.append(os.path.join(d, n))
    cats = {'nii': [], 'gz': [], 'parcels': [], 'events': [], 'confounds': [], 'json': [],
            'ini': [], 'names': []}
    for p in sorted(files):
        b = os.path.basename(p)
        if b == 'study.ini':
            cats['ini'].append(p)
        elif 'parcel' in b and b.endswith(('.nii', '.nii.gz')):
            cats['parcels'].append(p)
        elif b.endswith(('.nii', '.nii.gz')):
            cats['nii'].append(p)
            if b.endswith('.gz'):
                cats['gz'].append(p)
        elif b.endswith('_events.tsv'):
            cats['events'].append(p)
        elif 'confounds' in b or 'regressors' in b:
            cats['confounds'].append(p)
        elif b.endswith('.json'):
            cats['json'].append(p)
        elif b.endswith('.tsv') and 'parcel' in b:
            cats['names'].append(p)
    cats['nii'] += cats['parcels']
    cats['gz'] += [p for p in cats['parcels'] if p.endswith('.gz')]
    weights = {'nii': 5, 'gz': 2, 'parcels': 2, 'events': 4, 'confounds': 2, 'json': 2,
               'ini': 3, 'names': 1}
    cats['layout'] = [p for p in cats['nii'] if p.endswith(('_bold.nii', '_bold.nii.gz'))]
    weights['layout'] = 1
    kinds = [k for k in weights if cats[k]]
    kind = rng.choices(kinds, [weights[k] for k in kinds])[0]
    return kind, rng.choice(cats[kind])


def mutate_layout(rng, path):
    """Run discovery: a second file for one run, a BOLD entry that is not a file, a link loop, a session."""
    d, b = os.path.split(path)
    choice = rng.randrange(4)
    if choice == 0:
        other = b.replace('_task-', '_acq-x_task-', 1) if '_task-' in b else 'x_' + b
        shutil.copy(path, os.path.join(d, other))
        return Mut(path, 'second file for one run: %s' % other, True)
    if choice == 1:
        os.remove(path)
        os.mkdir(path)
        return Mut(path, 'BOLD entry replaced by a folder', True)
    if choice == 2:
        os.remove(path)
        os.symlink(b, path)
        return Mut(path, 'BOLD entry replaced by a link to itself', True)
    # move the run into ses-9 with a matching name: still a valid study
    sub = b.split('_')[0]
    nd = os.path.join(os.path.dirname(d), 'ses-9', 'func')
    os.makedirs(nd, exist_ok=True)
    stem = b.split('_bold.nii')[0]
    for f in os.listdir(d):
        if f.startswith(stem + '_'):
            os.rename(os.path.join(d, f), os.path.join(nd, f.replace(sub + '_', sub + '_ses-9_', 1)))
    return Mut(path, 'run moved into ses-9', False)


def apply(rng, kind, path):
    if kind == 'layout':
        return mutate_layout(rng, path)
    if kind == 'nii':
        if 'parcel' not in os.path.basename(path) and rng.random() < 0.2:
            return mutate_bold_data(rng, path)
        return mutate_nifti_header(rng, path)
    if kind == 'gz':
        return mutate_gzip_stream(rng, path)
    if kind == 'parcels':
        return mutate_parcels(rng, path)
    if kind in ('events', 'confounds', 'names'):
        return mutate_tsv(rng, path, kind)
    if kind == 'json':
        return mutate_json(rng, path)
    return mutate_ini(rng, path)


SAN_RE = re.compile(r'(AddressSanitizer|UndefinedBehaviorSanitizer|LeakSanitizer|runtime error:)')
PATH_RE = re.compile(r'[\w./-]+\.(nii\.gz|nii|tsv|json|ini|csv|hdr|img)\b|/[\w.-]+/')


def run(bin_, args, timeout, env):
    t0 = time.time()
    try:
        p = subprocess.run([bin_] + args, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                           timeout=timeout, env=env)
        return p.returncode, p.stderr.decode('utf-8', 'replace'), time.time() - t0
    except subprocess.TimeoutExpired as ex:
        return 'timeout', (ex.stderr or b'').decode('utf-8', 'replace'), time.time() - t0


def judge(cmd, rc, err, mut, outdir):
    """Returns a list of (kind, detail) findings for one command's result."""
    found = []
    if SAN_RE.search(err):
        m = SAN_RE.search(err)
        line = err[m.start():].split('\n', 1)[0]
        found.append(('sanitizer', line[:200]))
    if rc == 'timeout':
        found.append(('timeout', 'no answer in time'))
        return found
    if rc < 0:
        found.append(('signal', 'signal %d' % -rc))
    elif rc not in (0, 1, 2):
        if not found:
            found.append(('status', 'exit %d' % rc))
    elif rc == 1:
        base = os.path.basename(mut.path)
        if base not in err and not PATH_RE.search(err):
            found.append(('no-file', err.strip().replace('\n', ' | ')[:200]))
    elif rc == 0 and mut.invalid:
        found.append(('accepted', 'exit 0 after an invalidating mutation'))
    elif rc == 2:
        found.append(('usage', err.strip().replace('\n', ' | ')[:200]))
    if outdir and rc != 0:
        left = []
        for d, _, names in os.walk(outdir):
            left += [os.path.join(d, n) for n in names if re.match(r'^\..*\.tmp\.', n)]
        if left:
            found.append(('tempfile', 'left %s' % left[:3]))
    return found


def main():
    ap = argparse.ArgumentParser(description=__doc__.split('\n')[0])
    ap.add_argument('--study', action='append', required=True)
    ap.add_argument('--bin', required=True)
    ap.add_argument('--seed', type=int, default=1)
    ap.add_argument('--budget', type=float, default=60.0, help='seconds of wall time')
    ap.add_argument('--iterations', type=int, default=0, help='0: until the budget is spent')
    ap.add_argument('--timeout', type=float, default=20.0)
    ap.add_argument('--keep', help='copy each failing study here')
    ap.add_argument('--no-analyze', action='store_true')
    args = ap.parse_args()
    rng = random.Random(args.seed)
    env = dict(os.environ, ASAN_OPTIONS='detect_leaks=1:abort_on_error=0',
               UBSAN_OPTIONS='print_stacktrace=1', OPENBLAS_NUM_THREADS='1')
    t_end = time.time() + args.budget
    it = execs = flagged = 0
    seen = {}
    work = tempfile.mkdtemp(prefix='srfuzz.')
    # a private copy, so that rebuilding the binary mid-run cannot break the run
    binary = os.path.join(work, 'splitroi')
    shutil.copy2(args.bin, binary)
    try:
        while time.time() < t_end and (args.iterations == 0 or it < args.iterations):
            it += 1
            src = rng.choice(args.study)
            sdir = os.path.dirname(os.path.abspath(src))
            case = os.path.join(work, 'case')
            shutil.rmtree(case, ignore_errors=True)
            shutil.copytree(sdir, case, ignore=shutil.ignore_patterns('results', 'out*'))
            study = os.path.join(case, os.path.basename(src))
            kind, path = pick_target(rng, case)
            try:
                mut = apply(rng, kind, path)
            except Exception as ex:  # a mutation that does not apply is skipped, not a finding
                print('# iteration %d: mutation on %s failed: %s' % (it, path, ex))
                continue
            rel = os.path.relpath(mut.path, case)
            results = []
            rc, err, _ = run(binary, ['check', study], args.timeout, env)
            execs += 1
            results.append(('check', rc, err, None))
            if not args.no_analyze:
                out = os.path.join(work, 'out')
                shutil.rmtree(out, ignore_errors=True)
                rc2, err2, _ = run(binary, ['analyze', study, '--quiet', '--no-report', '--out',
                                              out], args.timeout, env)
                execs += 1
                results.append(('analyze', rc2, err2, out))
            for cmd, rc, err, out in results:
                for fk, detail in judge(cmd, rc, err, mut, out):
                    key = (fk, cmd, kind, re.sub(r'[0-9]+', 'N', detail)[:80])
                    seen[key] = seen.get(key, 0) + 1
                    if seen[key] > 2:
                        continue
                    flagged += 1
                    print('FLAG %s %s it=%d seed=%d file=%s mut=[%s] rc=%s: %s' % (
                        fk, cmd, it, args.seed, rel, mut.desc, rc, detail))
                    sys.stdout.flush()
                    if args.keep:
                        dst = os.path.join(args.keep, 'it%05d-%s-%s' % (it, fk, cmd))
                        if not os.path.exists(dst):
                            shutil.copytree(case, dst)
                            with open(os.path.join(dst, 'FLAG.txt'), 'w') as f:
                                f.write('%s %s file=%s mut=%s rc=%s\n%s\n' % (
                                    fk, cmd, rel, mut.desc, rc, err[-4000:]))
    finally:
        shutil.rmtree(work, ignore_errors=True)
    print('# %d iterations, %d executions, %d findings (%d distinct)' % (
        it, execs, flagged, len(seen)))
    return 1 if seen else 0


if __name__ == '__main__':
    sys.exit(main())
