// where_am_i HOST:PORT IMAGE.jpg CALIBRATION_ID: one fix from a running sightfix-server.
#include <fstream>
#include <iomanip>
#include <iostream>
#include <iterator>

#include "client/api/client.h"

int main(int argc, char** argv) {
  if (argc != 4) return 2;
  sightfix::ClientOptions options;
  options.endpoints = {argv[1]};
  auto client = sightfix::Client::Connect(options);
  if (!client.ok()) return std::cerr << client.status().ToString() << "\n", 1;
  std::ifstream in(argv[2], std::ios::binary);
  sightfix::v1::LocateRequest request;
  request.set_image(std::string(std::istreambuf_iterator<char>(in), {}));
  request.set_calibration_id(argv[3]);
  auto fix = (*client)->Locate(request, 20000);
  if (!fix.ok()) return std::cerr << fix.status().ToString() << "\n", 1;
  std::cout << sightfix::v1::Fix::Quality_Name(fix->quality()) << std::setprecision(10) << " "
            << fix->lat_deg() << " " << fix->lon_deg() << " " << fix->radius95_m() << "\n";
}
