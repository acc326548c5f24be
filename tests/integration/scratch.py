"""Every temporary folder a test process makes goes under one folder of its own, removed when the
process ends: repeated test runs leave nothing behind in the system's temporary folder."""
import atexit
import os
import shutil
import tempfile

ROOT = tempfile.mkdtemp(prefix="droopline-tests-")
os.chmod(ROOT, 0o755)  # a test may run the server as another user inside a folder it opens up
tempfile.tempdir = ROOT
atexit.register(shutil.rmtree, ROOT, True)
