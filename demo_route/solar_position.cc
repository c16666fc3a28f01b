// Equation numbers below are those of Reda & Andreas, NREL/TP-560-34302 (revised 2008).
#include "demo_route/solar_position.h"

#include <cmath>
#include <cstddef>
#include <iterator>
#include <string>

namespace sightfix::demo {
namespace {

// One periodic term of the Earth's heliocentric series: A cos(B + C * JME) (paper eq. 9).
struct PeriodicTerm {
  double a, b, c;
};

// The paper's Table A4.2 (the Earth's truncated VSOP87 series), copied from the paper; row counts
// are checked below against the table. A slip in one copied term changes L, B or R by at most that
// term's amplitude (1e-8 rad units), so the worked example and the comparison with full VSOP87
// (ephem) in the test bound what a slip in any large term could do.
// clang-format off
constexpr PeriodicTerm kL0[] = {
  {175347046, 0, 0}, {3341656, 4.6692568, 6283.07585}, {34894, 4.6261, 12566.1517},
  {3497, 2.7441, 5753.3849}, {3418, 2.8289, 3.5231}, {3136, 3.6277, 77713.7715},
  {2676, 4.4181, 7860.4194}, {2343, 6.1352, 3930.2097}, {1324, 0.7425, 11506.7698},
  {1273, 2.0371, 529.691}, {1199, 1.1096, 1577.3435}, {990, 5.233, 5884.927},
  {902, 2.045, 26.298}, {857, 3.508, 398.149}, {780, 1.179, 5223.694}, {753, 2.533, 5507.553},
  {505, 4.583, 18849.228}, {492, 4.205, 775.523}, {357, 2.92, 0.067}, {317, 5.849, 11790.629},
  {284, 1.899, 796.298}, {271, 0.315, 10977.079}, {243, 0.345, 5486.778},
  {206, 4.806, 2544.314}, {205, 1.869, 5573.143}, {202, 2.458, 6069.777}, {156, 0.833, 213.299},
  {132, 3.411, 2942.463}, {126, 1.083, 20.775}, {115, 0.645, 0.98}, {103, 0.636, 4694.003},
  {102, 0.976, 15720.839}, {102, 4.267, 7.114}, {99, 6.21, 2146.17}, {98, 0.68, 155.42},
  {86, 5.98, 161000.69}, {85, 1.3, 6275.96}, {85, 3.67, 71430.7}, {80, 1.81, 17260.15},
  {79, 3.04, 12036.46}, {75, 1.76, 5088.63}, {74, 3.5, 3154.69}, {74, 4.68, 801.82},
  {70, 0.83, 9437.76}, {62, 3.98, 8827.39}, {61, 1.82, 7084.9}, {57, 2.78, 6286.6},
  {56, 4.39, 14143.5}, {56, 3.47, 6279.55}, {52, 0.19, 12139.55}, {52, 1.33, 1748.02},
  {51, 0.28, 5856.48}, {49, 0.49, 1194.45}, {41, 5.37, 8429.24}, {41, 2.4, 19651.05},
  {39, 6.17, 10447.39}, {37, 6.04, 10213.29}, {37, 2.57, 1059.38}, {36, 1.71, 2352.87},
  {36, 1.78, 6812.77}, {33, 0.59, 17789.85}, {30, 0.44, 83996.85}, {30, 2.74, 1349.87},
  {25, 3.16, 4690.48}};
constexpr PeriodicTerm kL1[] = {
  {628331966747, 0, 0}, {206059, 2.678235, 6283.07585}, {4303, 2.6351, 12566.1517},
  {425, 1.59, 3.523}, {119, 5.796, 26.298}, {109, 2.966, 1577.344}, {93, 2.59, 18849.23},
  {72, 1.14, 529.69}, {68, 1.87, 398.15}, {67, 4.41, 5507.55}, {59, 2.89, 5223.69},
  {56, 2.17, 155.42}, {45, 0.4, 796.3}, {36, 0.47, 775.52}, {29, 2.65, 7.11}, {21, 5.34, 0.98},
  {19, 1.85, 5486.78}, {19, 4.97, 213.3}, {17, 2.99, 6275.96}, {16, 0.03, 2544.31},
  {16, 1.43, 2146.17}, {15, 1.21, 10977.08}, {12, 2.83, 1748.02}, {12, 3.26, 5088.63},
  {12, 5.27, 1194.45}, {12, 2.08, 4694}, {11, 0.77, 553.57}, {10, 1.3, 6286.6},
  {10, 4.24, 1349.87}, {9, 2.7, 242.73}, {9, 5.64, 951.72}, {8, 5.3, 2352.87},
  {6, 2.65, 9437.76}, {6, 4.67, 4690.48}};
constexpr PeriodicTerm kL2[] = {
  {52919, 0, 0}, {8720, 1.0721, 6283.0758}, {309, 0.867, 12566.152}, {27, 0.05, 3.52},
  {16, 5.19, 26.3}, {16, 3.68, 155.42}, {10, 0.76, 18849.23}, {9, 2.06, 77713.77},
  {7, 0.83, 775.52}, {5, 4.66, 1577.34}, {4, 1.03, 7.11}, {4, 3.44, 5573.14}, {3, 5.14, 796.3},
  {3, 6.05, 5507.55}, {3, 1.19, 242.73}, {3, 6.12, 529.69}, {3, 0.31, 398.15},
  {3, 2.28, 553.57}, {2, 4.38, 5223.69}, {2, 3.75, 0.98}};
constexpr PeriodicTerm kL3[] = {
  {289, 5.844, 6283.076}, {35, 0, 0}, {17, 5.49, 12566.15}, {3, 5.2, 155.42}, {1, 4.72, 3.52},
  {1, 5.3, 18849.23}, {1, 5.97, 242.73}};
constexpr PeriodicTerm kL4[] = {{114, 3.142, 0}, {8, 4.13, 6283.08}, {1, 3.84, 12566.15}};
constexpr PeriodicTerm kL5[] = {{1, 3.14, 0}};
constexpr PeriodicTerm kB0[] = {
  {280, 3.199, 84334.662}, {102, 5.422, 5507.553}, {80, 3.88, 5223.69}, {44, 3.7, 2352.87},
  {32, 4, 1577.34}};
constexpr PeriodicTerm kB1[] = {{9, 3.9, 5507.55}, {6, 1.73, 5223.69}};
constexpr PeriodicTerm kR0[] = {
  {100013989, 0, 0}, {1670700, 3.0984635, 6283.07585}, {13956, 3.05525, 12566.1517},
  {3084, 5.1985, 77713.7715}, {1628, 1.1739, 5753.3849}, {1576, 2.8469, 7860.4194},
  {925, 5.453, 11506.77}, {542, 4.564, 3930.21}, {472, 3.661, 5884.927}, {346, 0.964, 5507.553},
  {329, 5.9, 5223.694}, {307, 0.299, 5573.143}, {243, 4.273, 11790.629}, {212, 5.847, 1577.344},
  {186, 5.022, 10977.079}, {175, 3.012, 18849.228}, {110, 5.055, 5486.778}, {98, 0.89, 6069.78},
  {86, 5.69, 15720.84}, {86, 1.27, 161000.69}, {65, 0.27, 17260.15}, {63, 0.92, 529.69},
  {57, 2.01, 83996.85}, {56, 5.24, 71430.7}, {49, 3.25, 2544.31}, {47, 2.58, 775.52},
  {45, 5.54, 9437.76}, {43, 6.01, 6275.96}, {39, 5.36, 4694}, {38, 2.39, 8827.39},
  {37, 0.83, 19651.05}, {37, 4.9, 12139.55}, {36, 1.67, 12036.46}, {35, 1.84, 2942.46},
  {33, 0.24, 7084.9}, {32, 0.18, 5088.63}, {32, 1.78, 398.15}, {28, 1.21, 6286.6},
  {28, 1.9, 6279.55}, {26, 4.59, 10447.39}};
constexpr PeriodicTerm kR1[] = {
  {103019, 1.10749, 6283.07585}, {1721, 1.0644, 12566.1517}, {702, 3.142, 0},
  {32, 1.02, 18849.23}, {31, 2.84, 5507.55}, {25, 1.32, 5223.69}, {18, 1.42, 1577.34},
  {10, 5.91, 10977.08}, {9, 1.42, 6275.96}, {9, 0.27, 5486.78}};
constexpr PeriodicTerm kR2[] = {
  {4359, 5.7846, 6283.0758}, {124, 5.579, 12566.152}, {12, 3.14, 0}, {9, 3.63, 77713.77},
  {6, 1.87, 5573.14}, {3, 5.47, 18849.23}};
constexpr PeriodicTerm kR3[] = {{145, 4.273, 6283.076}, {7, 3.92, 12566.15}};
constexpr PeriodicTerm kR4[] = {{4, 2.56, 6283.08}};

// One row of the paper's Table A4.3: the multiples Y0..Y4 of the arguments X0..X4 and the
// coefficients a, b (longitude, 0.0001") and c, d (obliquity, 0.0001"), eqs. 15-22.
struct NutationTerm {
  int y[5];
  double a, b, c, d;
};
constexpr NutationTerm kNutation[] = {
  {{0, 0, 0, 0, 1}, -171996, -174.2, 92025, 8.9}, {{-2, 0, 0, 2, 2}, -13187, -1.6, 5736, -3.1},
  {{0, 0, 0, 2, 2}, -2274, -0.2, 977, -0.5}, {{0, 0, 0, 0, 2}, 2062, 0.2, -895, 0.5},
  {{0, 1, 0, 0, 0}, 1426, -3.4, 54, -0.1}, {{0, 0, 1, 0, 0}, 712, 0.1, -7, 0},
  {{-2, 1, 0, 2, 2}, -517, 1.2, 224, -0.6}, {{0, 0, 0, 2, 1}, -386, -0.4, 200, 0},
  {{0, 0, 1, 2, 2}, -301, 0, 129, -0.1}, {{-2, -1, 0, 2, 2}, 217, -0.5, -95, 0.3},
  {{-2, 0, 1, 0, 0}, -158, 0, 0, 0}, {{-2, 0, 0, 2, 1}, 129, 0.1, -70, 0},
  {{0, 0, -1, 2, 2}, 123, 0, -53, 0}, {{2, 0, 0, 0, 0}, 63, 0, 0, 0},
  {{0, 0, 1, 0, 1}, 63, 0.1, -33, 0}, {{2, 0, -1, 2, 2}, -59, 0, 26, 0},
  {{0, 0, -1, 0, 1}, -58, -0.1, 32, 0}, {{0, 0, 1, 2, 1}, -51, 0, 27, 0},
  {{-2, 0, 2, 0, 0}, 48, 0, 0, 0}, {{0, 0, -2, 2, 1}, 46, 0, -24, 0},
  {{2, 0, 0, 2, 2}, -38, 0, 16, 0}, {{0, 0, 2, 2, 2}, -31, 0, 13, 0},
  {{0, 0, 2, 0, 0}, 29, 0, 0, 0}, {{-2, 0, 1, 2, 2}, 29, 0, -12, 0},
  {{0, 0, 0, 2, 0}, 26, 0, 0, 0}, {{-2, 0, 0, 2, 0}, -22, 0, 0, 0},
  {{0, 0, -1, 2, 1}, 21, 0, -10, 0}, {{0, 2, 0, 0, 0}, 17, -0.1, 0, 0},
  {{2, 0, -1, 0, 1}, 16, 0, -8, 0}, {{-2, 2, 0, 2, 2}, -16, 0.1, 7, 0},
  {{0, 1, 0, 0, 1}, -15, 0, 9, 0}, {{-2, 0, 1, 0, 1}, -13, 0, 7, 0},
  {{0, -1, 0, 0, 1}, -12, 0, 6, 0}, {{0, 0, 2, -2, 0}, 11, 0, 0, 0},
  {{2, 0, -1, 2, 1}, -10, 0, 5, 0}, {{2, 0, 1, 2, 2}, -8, 0, 3, 0},
  {{0, 1, 0, 2, 2}, 7, 0, -3, 0}, {{-2, 1, 1, 0, 0}, -7, 0, 0, 0},
  {{0, -1, 0, 2, 2}, -7, 0, 3, 0}, {{2, 0, 0, 2, 1}, -7, 0, 3, 0},
  {{2, 0, 1, 0, 0}, 6, 0, 0, 0}, {{-2, 0, 2, 2, 2}, 6, 0, -3, 0},
  {{-2, 0, 1, 2, 1}, 6, 0, -3, 0}, {{2, 0, -2, 0, 1}, -6, 0, 3, 0},
  {{2, 0, 0, 0, 1}, -6, 0, 3, 0}, {{0, -1, 1, 0, 0}, 5, 0, 0, 0},
  {{-2, -1, 0, 2, 1}, -5, 0, 3, 0}, {{-2, 0, 0, 0, 1}, -5, 0, 3, 0},
  {{0, 0, 2, 2, 1}, -5, 0, 3, 0}, {{-2, 0, 2, 0, 1}, 4, 0, 0, 0},
  {{-2, 1, 0, 2, 1}, 4, 0, 0, 0}, {{0, 0, 1, -2, 0}, 4, 0, 0, 0},
  {{-1, 0, 1, 0, 0}, -4, 0, 0, 0}, {{-2, 1, 0, 0, 0}, -4, 0, 0, 0},
  {{1, 0, 0, 0, 0}, -4, 0, 0, 0}, {{0, 0, 1, 2, 0}, 3, 0, 0, 0},
  {{0, 0, -2, 2, 2}, -3, 0, 0, 0}, {{-1, -1, 1, 0, 0}, -3, 0, 0, 0},
  {{0, 1, 1, 0, 0}, -3, 0, 0, 0}, {{0, -1, 1, 2, 2}, -3, 0, 0, 0},
  {{2, -1, -1, 2, 2}, -3, 0, 0, 0}, {{0, 0, 3, 2, 2}, -3, 0, 0, 0},
  {{2, -1, 0, 2, 2}, -3, 0, 0, 0}};
// clang-format on

// The table's row counts (Table A4.2: L0..L5, B0..B1, R0..R4; Table A4.3: 63 rows).
static_assert(std::size(kL0) == 64 && std::size(kL1) == 34 && std::size(kL2) == 20 &&
              std::size(kL3) == 7 && std::size(kL4) == 3 && std::size(kL5) == 1);
static_assert(std::size(kB0) == 5 && std::size(kB1) == 2);
static_assert(std::size(kR0) == 40 && std::size(kR1) == 10 && std::size(kR2) == 6 &&
              std::size(kR3) == 2 && std::size(kR4) == 1);
static_assert(std::size(kNutation) == 63);

constexpr double kPi = 3.14159265358979323846;
double Rad(double deg) { return deg * (kPi / 180.0); }
double Deg(double rad) { return rad * (180.0 / kPi); }
// deg reduced to [0, 360) (a tiny negative remainder would round to 360 when shifted).
double Wrap360(double deg) {
  const double r = std::fmod(deg, 360.0);
  const double wrapped = r < 0 ? r + 360.0 : r;
  return wrapped >= 360.0 ? 0.0 : wrapped;
}

constexpr double kJ2000 = 2451545.0;               // Julian day of 2000-01-01 12:00 TT
constexpr double kUnixEpochJulianDay = 2440587.5;  // 1970-01-01 00:00 UTC
constexpr double kSecondsPerDay = 86400.0;
// The sun's apparent radius and the refraction at the horizon (the paper's defaults): with the
// centre below -(their sum) the whole disc is below the refracted horizon, and the paper applies
// no refraction (eq. 42).
constexpr double kSunRadiusDeg = 0.26667, kHorizonRefractionDeg = 0.5667;

// The times the algorithm runs on (eqs. 4-7): Julian (ephemeris) day, century and millennium.
struct JulianTimes {
  double jd, jc, jce, jme;
};

JulianTimes MakeJulianTimes(double julian_day_ut1, double delta_t_s) {
  JulianTimes t;
  t.jd = julian_day_ut1;
  const double jde = julian_day_ut1 + delta_t_s / kSecondsPerDay;
  t.jc = (t.jd - kJ2000) / 36525.0;
  t.jce = (jde - kJ2000) / 36525.0;
  t.jme = t.jce / 10.0;
  return t;
}

template <size_t N>
double SumTerms(const PeriodicTerm (&terms)[N], double jme) {
  double sum = 0;
  for (const PeriodicTerm& t : terms) sum += t.a * std::cos(t.b + t.c * jme);
  return sum;
}

// Horner in JME over the per-power sums, divided by 1e8 (eqs. 10-11): radians, or AU for R.
double Series(const double* sums, int count, double jme) {
  double value = 0;
  for (int i = count - 1; i >= 0; --i) value = value * jme + sums[i];
  return value / 1e8;
}

// The Earth's heliocentric longitude and latitude (degrees) and radius vector (AU), eqs. 9-13.
struct Heliocentric {
  double longitude_deg, latitude_deg, radius_au;
};

Heliocentric EarthHeliocentric(double jme) {
  const double l[] = {SumTerms(kL0, jme), SumTerms(kL1, jme), SumTerms(kL2, jme),
                      SumTerms(kL3, jme), SumTerms(kL4, jme), SumTerms(kL5, jme)};
  const double b[] = {SumTerms(kB0, jme), SumTerms(kB1, jme)};
  const double r[] = {SumTerms(kR0, jme), SumTerms(kR1, jme), SumTerms(kR2, jme),
                      SumTerms(kR3, jme), SumTerms(kR4, jme)};
  return {Wrap360(Deg(Series(l, 6, jme))), Deg(Series(b, 2, jme)), Series(r, 5, jme)};
}

// Nutation in longitude and obliquity, degrees (eqs. 15-23).
struct Nutation {
  double longitude_deg, obliquity_deg;
};

Nutation EarthNutation(double jce) {
  const double jce2 = jce * jce, jce3 = jce2 * jce;
  const double x[5] = {
      297.85036 + 445267.111480 * jce - 0.0019142 * jce2 + jce3 / 189474.0,  // moon elongation
      357.52772 + 35999.050340 * jce - 0.0001603 * jce2 - jce3 / 300000.0,   // sun anomaly
      134.96298 + 477198.867398 * jce + 0.0086972 * jce2 + jce3 / 56250.0,   // moon anomaly
      93.27191 + 483202.017538 * jce - 0.0036825 * jce2 + jce3 / 327270.0,   // moon latitude
      125.04452 - 1934.136261 * jce + 0.0020708 * jce2 + jce3 / 450000.0};   // moon node
  double psi = 0, epsilon = 0;
  for (const NutationTerm& n : kNutation) {
    double argument_deg = 0;
    for (int j = 0; j < 5; ++j) argument_deg += x[j] * n.y[j];
    psi += (n.a + n.b * jce) * std::sin(Rad(argument_deg));
    epsilon += (n.c + n.d * jce) * std::cos(Rad(argument_deg));
  }
  return {psi / 36000000.0, epsilon / 36000000.0};
}

// The mean obliquity of the ecliptic in arc seconds (eq. 24), U = JME / 10.
double MeanObliquityArcsec(double jme) {
  static constexpr double kCoefficients[] = {84381.448, -4680.93, -1.55, 1999.25, -51.38, -249.67,
                                             -39.05,    7.12,     27.87, 5.79,    2.45};
  const double u = jme / 10.0;
  double value = 0;
  for (int i = 10; i >= 0; --i) value = value * u + kCoefficients[i];
  return value;
}

// The sun's geocentric apparent right ascension and declination and the apparent sidereal
// time at Greenwich, degrees (eqs. 13-14, 24-30).
struct Geocentric {
  double right_ascension_deg, declination_deg, sidereal_time_deg, radius_au;
};

Geocentric SunGeocentric(const JulianTimes& t) {
  const Heliocentric earth = EarthHeliocentric(t.jme);
  const Nutation nutation = EarthNutation(t.jce);
  const double epsilon = Rad(MeanObliquityArcsec(t.jme) / 3600.0 + nutation.obliquity_deg);
  const double aberration_deg = -20.4898 / (3600.0 * earth.radius_au);
  const double lambda = Rad(earth.longitude_deg + 180.0 + nutation.longitude_deg + aberration_deg);
  const double beta = Rad(-earth.latitude_deg);
  const double mean_sidereal_deg = 280.46061837 + 360.98564736629 * (t.jd - kJ2000) +
                                   0.000387933 * t.jc * t.jc - t.jc * t.jc * t.jc / 38710000.0;
  Geocentric g;
  g.sidereal_time_deg = Wrap360(mean_sidereal_deg + nutation.longitude_deg * std::cos(epsilon));
  g.right_ascension_deg = Wrap360(
      Deg(std::atan2(std::sin(lambda) * std::cos(epsilon) - std::tan(beta) * std::sin(epsilon),
                     std::cos(lambda))));
  g.declination_deg = Deg(std::asin(std::sin(beta) * std::cos(epsilon) +
                                    std::cos(beta) * std::sin(epsilon) * std::sin(lambda)));
  g.radius_au = earth.radius_au;
  return g;
}

// The sun seen from the observer without refraction: elevation and azimuth east of north,
// degrees (eqs. 31-41, 44-46; parallax on the paper's ellipsoid, a = 6378140 m, b/a =
// 0.99664719).
struct Topocentric {
  double elevation_deg, azimuth_deg;
};

Topocentric SunTopocentric(const Geocentric& g, double hour_angle_deg,
                           const SolarPositionOptions& o) {
  const double xi = Rad(8.794 / (3600.0 * g.radius_au));  // equatorial horizontal parallax
  const double phi = Rad(o.latitude_deg);
  const double u = std::atan(0.99664719 * std::tan(phi));
  const double x = std::cos(u) + o.elevation_m / 6378140.0 * std::cos(phi);
  const double y = 0.99664719 * std::sin(u) + o.elevation_m / 6378140.0 * std::sin(phi);
  const double h = Rad(hour_angle_deg), delta = Rad(g.declination_deg);
  const double denominator = std::cos(delta) - x * std::sin(xi) * std::cos(h);
  const double delta_alpha = std::atan2(-x * std::sin(xi) * std::sin(h), denominator);
  const double delta_prime =
      std::atan2((std::sin(delta) - y * std::sin(xi)) * std::cos(delta_alpha), denominator);
  const double h_prime = h - delta_alpha;
  Topocentric t;
  t.elevation_deg = Deg(std::asin(std::sin(phi) * std::sin(delta_prime) +
                                  std::cos(phi) * std::cos(delta_prime) * std::cos(h_prime)));
  const double astronomers_azimuth = std::atan2(
      std::sin(h_prime), std::cos(h_prime) * std::sin(phi) - std::tan(delta_prime) * std::cos(phi));
  t.azimuth_deg = Wrap360(Deg(astronomers_azimuth) + 180.0);
  return t;
}

// The refraction lifting the sun at geometric elevation e0 (eqs. 42-43), degrees.
double RefractionDeg(double e0_deg, const SolarPositionOptions& o) {
  if (e0_deg < -(kSunRadiusDeg + kHorizonRefractionDeg)) return 0.0;
  return (o.pressure_mbar / 1010.0) * (283.0 / (273.0 + o.temperature_c)) * 1.02 /
         (60.0 * std::tan(Rad(e0_deg + 10.3 / (e0_deg + 5.11))));
}

SolarPosition SolarPositionAt(double julian_day_utc, const SolarPositionOptions& o) {
  const double jd_ut1 = julian_day_utc + o.delta_ut1_s / kSecondsPerDay;
  const Geocentric g = SunGeocentric(MakeJulianTimes(jd_ut1, o.delta_t_s));
  SolarPosition p;
  p.julian_day = jd_ut1;
  p.earth_sun_distance_au = g.radius_au;
  p.right_ascension_deg = g.right_ascension_deg;
  p.declination_deg = g.declination_deg;
  p.hour_angle_deg = Wrap360(g.sidereal_time_deg + o.longitude_deg - g.right_ascension_deg);
  const Topocentric t = SunTopocentric(g, p.hour_angle_deg, o);
  p.geometric_elevation_deg = t.elevation_deg;
  p.elevation_deg = t.elevation_deg + RefractionDeg(t.elevation_deg, o);
  p.zenith_deg = 90.0 - p.elevation_deg;
  p.azimuth_deg = t.azimuth_deg;
  return p;
}

// InvalidArgument "<field> = <value> outside [lo, hi]" unless lo <= value <= hi (NaN fails).
Status CheckRange(const char* field, double value, double lo, double hi) {
  if (value >= lo && value <= hi) return Status::Ok();
  return Status::InvalidArgument(std::string(field) + " = " + std::to_string(value) + " outside [" +
                                 std::to_string(lo) + ", " + std::to_string(hi) + "]");
}

Result<SolarPosition> Compute(double julian_day_utc, const SolarPositionOptions& o) {
  if (Status s = o.Validate(); !s.ok()) return s;
  // The paper's stated range: years -2000 to 6000.
  const double first = JulianDay(UtcTime{-2000, 1, 1, 0, 0, 0});
  const double end = JulianDay(UtcTime{6001, 1, 1, 0, 0, 0});
  if (!(julian_day_utc >= first && julian_day_utc < end))
    return Status::InvalidArgument("time outside the years -2000 to 6000 (Julian day " +
                                   std::to_string(julian_day_utc) + ")");
  return SolarPositionAt(julian_day_utc, o);
}

}  // namespace

Status UtcTime::Validate() const {
  for (const Status& s :
       {CheckRange("UtcTime.year", year, -2000, 6000), CheckRange("UtcTime.month", month, 1, 12),
        CheckRange("UtcTime.day", day, 1, 31), CheckRange("UtcTime.hour", hour, 0, 23),
        CheckRange("UtcTime.minute", minute, 0, 59),
        CheckRange("UtcTime.second", second, 0, 60.999999)}) {
    if (!s.ok()) return s;
  }
  return Status::Ok();
}

Status SolarPositionOptions::Validate() const {
  for (const Status& s :
       {CheckRange("SolarPositionOptions.latitude_deg", latitude_deg, -90, 90),
        CheckRange("SolarPositionOptions.longitude_deg", longitude_deg, -180, 180),
        CheckRange("SolarPositionOptions.elevation_m", elevation_m, -6500000, 1e8),
        CheckRange("SolarPositionOptions.pressure_mbar", pressure_mbar, 0, 5000),
        CheckRange("SolarPositionOptions.temperature_c", temperature_c, -272, 6000),
        CheckRange("SolarPositionOptions.delta_t_s", delta_t_s, -8000, 8000),
        CheckRange("SolarPositionOptions.delta_ut1_s", delta_ut1_s, -1, 1)}) {
    if (!s.ok()) return s;
  }
  return Status::Ok();
}

double JulianDay(const UtcTime& time) {
  int year = time.year, month = time.month;
  if (month < 3) year -= 1, month += 12;
  const double day = time.day + (time.hour + (time.minute + time.second / 60.0) / 60.0) / 24.0;
  // INT() of the paper is truncation toward zero (eq. 4).
  double jd = std::trunc(365.25 * (year + 4716)) + std::trunc(30.6001 * (month + 1)) + day - 1524.5;
  if (jd > 2299160.0) {  // Gregorian calendar from 15 October 1582
    const double a = std::trunc(year / 100.0);
    jd += 2 - a + std::trunc(a / 4.0);
  }
  return jd;
}

Result<SolarPosition> ComputeSolarPosition(double unix_seconds,
                                           const SolarPositionOptions& options) {
  return Compute(unix_seconds / kSecondsPerDay + kUnixEpochJulianDay, options);
}

Result<SolarPosition> ComputeSolarPosition(const UtcTime& time,
                                           const SolarPositionOptions& options) {
  if (Status s = time.Validate(); !s.ok()) return s;
  return Compute(JulianDay(time), options);
}

}  // namespace sightfix::demo
