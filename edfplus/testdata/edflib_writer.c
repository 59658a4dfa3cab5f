/* Writes an EDF+ or BDF+ fixture with EDFlib (Debian libedf-dev) whose
 * digital samples and annotations are known in advance, so that the Go
 * tests can check what muarc reads against values it did not write.
 *
 *   edflib_writer OUT.edf|OUT.bdf edf|bdf [ANNOTATIONS]
 *
 * ANNOTATIONS, when given, is a text file of more annotations, one a line:
 * the onset in units of 100 us, a tab, the UTF-8 text. EDFlib stores one
 * annotation per data record and annotation signal, so the file gets as
 * many annotation signals as the four records need.
 *
 * Signal s (0..2), sample n (over the whole file) has the digital value
 * dmin + (n*7919 + s*104729) mod (dmax-dmin+1). Annotations: see below. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <edflib.h>

static const int rate[3] = {256, 512, 100}; /* samples per 1 s record */
static const char *label[3] = {"EMG r1c1", "EMG r1c2", "Force"};
static const char *unit[3] = {"uV", "uV", "N"};
static const double pmin[3] = {-3276.8, -8000, -50};
static const double pmax[3] = {3276.7, 8000, 950};

int main(int argc, char **argv) {
	if (argc != 3 && argc != 4) {
		fprintf(stderr, "usage: edflib_writer OUT edf|bdf [ANNOTATIONS]\n");
		return 2;
	}
	int bdf = strcmp(argv[2], "bdf") == 0;
	int dmin = bdf ? -8388608 : -32768, dmax = bdf ? 8388607 : 32767;
	int h = edfopen_file_writeonly(argv[1], bdf ? EDFLIB_FILETYPE_BDFPLUS : EDFLIB_FILETYPE_EDFPLUS, 3);
	if (h < 0) {
		fprintf(stderr, "edfopen_file_writeonly: %d\n", h);
		return 1;
	}
	if (argc == 4) {
		FILE *f = fopen(argv[3], "r");
		int lines = 3, c;
		if (!f) {
			perror(argv[3]);
			return 1;
		}
		while ((c = fgetc(f)) != EOF)
			lines += c == '\n';
		fclose(f);
		int sigs = (lines + 3) / 4 + 1;
		if (edf_set_number_of_annotation_signals(h, sigs > 64 ? 64 : sigs)) {
			fprintf(stderr, "edf_set_number_of_annotation_signals refused\n");
			return 1;
		}
	}
	for (int s = 0; s < 3; s++) {
		if (edf_set_samplefrequency(h, s, rate[s]) || edf_set_physical_minimum(h, s, pmin[s]) ||
		    edf_set_physical_maximum(h, s, pmax[s]) || edf_set_digital_minimum(h, s, dmin) ||
		    edf_set_digital_maximum(h, s, dmax) || edf_set_label(h, s, label[s]) ||
		    edf_set_physical_dimension(h, s, unit[s]) || edf_set_prefilter(h, s, "HP:20Hz LP:500Hz")) {
			fprintf(stderr, "signal %d settings refused\n", s);
			return 1;
		}
	}
	edf_set_startdatetime(h, 2026, 3, 14, 9, 30, 5);
	edf_set_patientname(h, "X");
	long long n[3] = {0, 0, 0};
	int buf[512];
	for (int rec = 0; rec < 4; rec++) {
		for (int s = 0; s < 3; s++) {
			for (int k = 0; k < rate[s]; k++, n[s]++)
				buf[k] = dmin + (int)((n[s] * 7919 + (long long)s * 104729) % ((long long)dmax - dmin + 1));
			if (edfwrite_digital_samples(h, buf)) {
				fprintf(stderr, "edfwrite_digital_samples failed\n");
				return 1;
			}
		}
	}
	/* onset and duration in units of 100 us (EDFlib's convention) */
	edfwrite_annotation_utf8(h, 5000, 12500, "ramp up");
	edfwrite_annotation_utf8(h, 10001, -1, "unit 3");
	edfwrite_annotation_utf8(h, 25000, -1, "Plateau \xc2\xb5V");
	if (argc == 4) {
		FILE *f = fopen(argv[3], "r");
		char line[1024];
		if (!f) {
			perror(argv[3]);
			return 1;
		}
		while (fgets(line, sizeof line, f)) {
			char *tab = strchr(line, '\t');
			if (!tab)
				continue;
			*tab = 0;
			line[strcspn(tab + 1, "\n") + (tab + 1 - line)] = 0;
			if (edfwrite_annotation_utf8(h, atoll(line), -1, tab + 1)) {
				fprintf(stderr, "annotation refused: %s\n", tab + 1);
				return 1;
			}
		}
		fclose(f);
	}
	if (edfclose_file(h)) {
		fprintf(stderr, "edfclose_file failed\n");
		return 1;
	}
	return 0;
}
