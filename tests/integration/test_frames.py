"""Frame decoding of the DCMTK shim (`mitilog frame`), checked against two
independent decoders of the same files: DCMTK's own `dcmj2pnm` (the
reference for every syntax DCMTK decodes, and the only one for JPEG
baseline, whose decoded pixels depend on the decoder's IDCT) and pydicom
with NumPy (native, RLE and, through Pillow's OpenJPEG, JPEG 2000).

The compressed files are made from native ones by DCMTK's `dcmcjpeg`,
`dcmcrle` and `dcmcjpls` (JPEG 2000 by Pillow's OpenJPEG encoder,
encapsulated by pydicom, PS3.5 section A.4).
"""

import os
import subprocess
import sys

import numpy
import pydicom
import pytest
from PIL import Image
from pydicom.encaps import encapsulate

from conftest import BINARY, REPO, run

sys.path.insert(0, os.path.join(REPO, "tests", "fixtures"))
import make_screens  # noqa: E402

# name: (dcmtk compressor command or None, lossless)
SYNTAXES = {
    "native": (None, True),
    "rle": (["dcmcrle"], True),
    "jpeg_baseline": (["dcmcjpeg", "+eb"], False),
    "jpeg_extended": (["dcmcjpeg", "+ee"], False),
    "jpeg_lossless": (["dcmcjpeg", "+e1"], True),
    "jpegls": (["dcmcjpls", "+el"], True),
}

# name: (device, drawn values, frames, colour)
SOURCES = {
    "grey": ("pixels_only", dict(mi="1.2", tis="0.4"), 1, False),
    "colour": ("both", dict(mi="1.1", tib="0.8"), 1, True),
    "cine": ("pixels_only", dict(mi="1.0", tis="0.6"), 3, False),
}


def read_pnm(path):
    image = Image.open(path)
    image.load()
    return numpy.asarray(image, dtype=numpy.uint8)


def grey_of(rgb):
    """The shim's documented grey of a colour pixel: ITU-R BT.601 luma
    weights, (299 R + 587 G + 114 B + 500) / 1000 in integers (dcm.h)."""
    rgb = rgb.astype(numpy.int64)
    return ((299 * rgb[..., 0] + 587 * rgb[..., 1] + 114 * rgb[..., 2] + 500)
            // 1000).astype(numpy.uint8)


def shim_frame(tmp_path, path, index, colour=False):
    out = str(tmp_path / ("shim-%d-%s.pnm" % (index, os.path.basename(path))))
    cmd = [BINARY, "frame", "--index", str(index), "--output", out, path]
    if colour:
        cmd.insert(2, "--colour")
    result = run(cmd)
    assert result.returncode == 0, result.stderr
    return read_pnm(out)


def dcmtk_frame(tmp_path, path, index):
    out = str(tmp_path / ("dcmtk-%d-%s.pnm" % (index, os.path.basename(path))))
    # dcmj2pnm numbers frames from 1; +op writes binary PGM/PPM
    result = run(["dcmj2pnm", "+F", str(index + 1), "+op", path, out])
    if result.returncode != 0 and "PhotometricInterpretation" in result.stderr:
        # dcmj2pnm 3.6.7 cannot tell the colour model of a multi-frame
        # JPEG-LS object before decoding it: decompress with DCMTK's
        # dcmdjpls first, then convert.
        native = out + ".dcm"
        result = run(["dcmdjpls", path, native])
        assert result.returncode == 0, result.stderr
        result = run(["dcmj2pnm", "+F", str(index + 1), "+op", native, out])
    assert result.returncode == 0, result.stderr
    return read_pnm(out)


def pydicom_frame(path, index):
    ds = pydicom.dcmread(path)
    array = ds.pixel_array
    frames = int(getattr(ds, "NumberOfFrames", 1) or 1)
    return array[index] if frames > 1 else array


@pytest.fixture(scope="module")
def screen_files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("screens")
    files = {}
    for source, (device, drawn, frames, colour) in SOURCES.items():
        native = str(folder / ("%s-native.dcm" % source))
        make_screens.write(make_screens.make_screen("frames-" + source, device, drawn,
                                                    frames=frames, colour=colour), native)
        for syntax, (command, _) in SYNTAXES.items():
            if command is None:
                files[source, syntax] = native
                continue
            path = str(folder / ("%s-%s.dcm" % (source, syntax)))
            result = run(command + [native, path])
            assert result.returncode == 0, result.stderr
            files[source, syntax] = path
        files[source, "jpeg2000"] = make_screens.write_jpeg2000(native, str(folder / ("%s-j2k.dcm" % source)))
    return files


@pytest.mark.parametrize("source", sorted(SOURCES))
@pytest.mark.parametrize("syntax", sorted(SYNTAXES))
def test_frames_equal_dcmj2pnm(tmp_path, screen_files, source, syntax):
    """Every frame equals DCMTK's own dcmj2pnm output of the same file,
    exactly, whatever the syntax (the same decoder settings: no VOI window,
    YCbCr converted to RGB as dcmj2pnm's default +cp does)."""
    device, drawn, frames, colour = SOURCES[source]
    path = screen_files[source, syntax]
    for index in range(frames):
        reference = dcmtk_frame(tmp_path, path, index)
        if colour:
            assert numpy.array_equal(shim_frame(tmp_path, path, index, colour=True), reference)
            assert numpy.array_equal(shim_frame(tmp_path, path, index), grey_of(reference))
        else:
            assert numpy.array_equal(shim_frame(tmp_path, path, index), reference)


@pytest.mark.parametrize("source", sorted(SOURCES))
@pytest.mark.parametrize("syntax", ["native", "rle", "jpeg2000"])
def test_lossless_frames_equal_pydicom(tmp_path, screen_files, source, syntax):
    """Lossless syntaxes give back exactly the pixels drawn, as pydicom with
    NumPy (its own RLE decoder, Pillow's OpenJPEG for JPEG 2000) decodes
    them from the same file (PS3.5 section 8.2: lossless means identical)."""
    device, drawn, frames, colour = SOURCES[source]
    path = screen_files[source, syntax]
    native = screen_files[source, "native"]
    for index in range(frames):
        reference = pydicom_frame(path, index)
        assert numpy.array_equal(reference, pydicom_frame(native, index))
        if colour:
            assert numpy.array_equal(shim_frame(tmp_path, path, index, colour=True), reference)
            assert numpy.array_equal(shim_frame(tmp_path, path, index), grey_of(reference))
        else:
            assert numpy.array_equal(shim_frame(tmp_path, path, index), reference)


@pytest.mark.parametrize("syntax", ["jpeg_lossless", "jpegls"])
def test_lossless_dcmtk_syntaxes_equal_the_drawing(tmp_path, screen_files, syntax):
    """JPEG lossless (process 14 SV1) and JPEG-LS lossless give back the
    native file's pixels exactly (PS3.5 sections 8.2.1 and 8.2.3)."""
    for source, (device, drawn, frames, colour) in SOURCES.items():
        for index in range(frames):
            native = pydicom_frame(screen_files[source, "native"], index)
            decoded = shim_frame(tmp_path, screen_files[source, syntax], index, colour=colour)
            assert numpy.array_equal(decoded, native)


def test_frame_past_the_end_is_refused_with_a_reason(tmp_path, screen_files):
    """A frame the object does not have: a reason, no pixels (common
    practice, no source)."""
    out = str(tmp_path / "none.pgm")
    result = run([BINARY, "frame", "--index", "3", "--output", out,
                  screen_files["cine", "native"]])
    assert result.returncode == 1
    assert "frame 4 asked for but the object has 3" in result.stderr
    assert not os.path.exists(out)


def truncated_copy(source, path, keep_fraction):
    """The file with its last fragment cut short (the item length kept
    consistent), so that the codestream ends early."""
    ds = pydicom.dcmread(source)
    from pydicom.encaps import generate_pixel_data_frame
    frames = list(generate_pixel_data_frame(ds.PixelData, int(getattr(ds, "NumberOfFrames", 1) or 1)))
    frames[-1] = frames[-1][:int(len(frames[-1]) * keep_fraction)]
    ds.PixelData = encapsulate(frames, has_bot=False)
    ds.save_as(path, write_like_original=False)
    return path


@pytest.mark.parametrize("syntax", ["jpeg_baseline", "jpegls", "rle", "jpeg2000"])
def test_damaged_frame_is_not_read_never_a_crash(tmp_path, screen_files, syntax):
    """A frame whose compressed bytes stop a quarter of the way: exit 1 with
    a reason, no output file, no crash; never pixels made up for what is
    missing (an RLE frame cut short is checked against PS3.5 section G.3:
    each segment must unpack to Rows x Columns bytes)."""
    damaged = truncated_copy(screen_files["grey", syntax], str(tmp_path / "damaged.dcm"), 0.25)
    out = str(tmp_path / "damaged.pgm")
    result = run([BINARY, "frame", "--output", out, damaged])
    assert result.returncode == 1, result.stderr
    assert "not read:" in result.stderr
    assert "does not decode" in result.stderr
    assert not os.path.exists(out)


def test_enhanced_us_volume_is_refused(tmp_path, screen_files):
    """Enhanced US Volume frames are slices of a volume, not screens:
    refused with a reason (PS3.3 section A.59)."""
    ds = pydicom.dcmread(screen_files["grey", "native"])
    ds.SOPClassUID = "1.2.840.10008.5.1.4.1.1.6.2"
    ds.file_meta.MediaStorageSOPClassUID = ds.SOPClassUID
    path = str(tmp_path / "volume.dcm")
    ds.save_as(path, write_like_original=False)
    result = run([BINARY, "frame", "--output", str(tmp_path / "v.pgm"), path])
    assert result.returncode == 1
    assert "Enhanced US Volume" in result.stderr


def test_object_without_pixels_is_refused(tmp_path, screen_files):
    ds = pydicom.dcmread(screen_files["grey", "native"])
    del ds.PixelData
    path = str(tmp_path / "nopixels.dcm")
    ds.save_as(path, write_like_original=False)
    result = run([BINARY, "frame", "--output", str(tmp_path / "n.pgm"), path])
    assert result.returncode == 1
    assert "no pixel data" in result.stderr
