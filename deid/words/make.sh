#!/bin/sh
# Regenerates english.txt.gz from Debian's wamerican (apt-get install wamerican).
set -eu
cd "$(dirname "$0")"
{
	echo "# Ordinary English words: the lower-case entries of 3 or more letters of"
	echo "# Debian's wamerican word list (SCOWL); see deid/words/SCOWL-NOTICE."
	grep -E '^[a-z]{3,}$' /usr/share/dict/american-english
} | gzip -9n >english.txt.gz
