/* xoshiro256** 1.0 (Blackman & Vigna, "Scrambled linear pseudorandom number
 * generators", 2018), seeded by splitmix64 as its authors recommend. */
#include <math.h>
#include "omen/util.h"

static uint64_t rotl(uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }

void omen_rng_seed(omen_rng *r, uint64_t seed)
{
	int i;
	for (i = 0; i < 4; i++) {
		uint64_t z = (seed += 0x9e3779b97f4a7c15ull);
		z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ull;
		z = (z ^ (z >> 27)) * 0x94d049bb133111ebull;
		r->s[i] = z ^ (z >> 31);
	}
}

uint64_t omen_rng_next(omen_rng *r)
{
	uint64_t *s = r->s;
	uint64_t result = rotl(s[1] * 5, 7) * 9, t = s[1] << 17;
	s[2] ^= s[0];
	s[3] ^= s[1];
	s[1] ^= s[2];
	s[0] ^= s[3];
	s[2] ^= t;
	s[3] = rotl(s[3], 45);
	return result;
}

double omen_rng_uniform(omen_rng *r) { return (double)(omen_rng_next(r) >> 11) * 0x1.0p-53; }

float omen_rng_normal(omen_rng *r)
{
	double u1 = omen_rng_uniform(r), u2 = omen_rng_uniform(r);
	if (u1 < 1e-300)
		u1 = 1e-300;
	return (float)(sqrt(-2.0 * log(u1)) * cos(2.0 * M_PI * u2));
}
