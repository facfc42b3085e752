#include "support/report_check.h"

#include <cstdlib>

#include <nlohmann/json.hpp>

#include "support/test_paths.h"

namespace stepledger::testing {

HtmlReportCheck CheckHtmlReport(const std::filesystem::path& html) {
  HtmlReportCheck check;
  const std::filesystem::path script = SourceDir() / "tests" / "support" / "report_html_check.py";
  std::string output;
  const int status =
      RunCommand("'" + ReferencePython() + "' '" + script.string() + "' '" + html.string() + "'", &output);
  if (status != 0) {
    check.error = "html checker failed with status " + std::to_string(status) + ": " + output;
    return check;
  }
  const nlohmann::json result = nlohmann::json::parse(output, nullptr, false);
  if (result.is_discarded()) {
    check.error = "html checker printed no JSON: " + output;
    return check;
  }
  check.ran = true;
  check.doctype = result.value("doctype", false);
  for (const auto& problem : result["problems"]) check.problems.push_back(problem.get<std::string>());
  for (const auto& [kind, count] : result["counts"].items()) check.counts[kind] = count.get<int>();
  for (const auto& chart : result["charts"]) {
    std::map<std::string, int> points;
    for (const auto& [kind, count] : chart["points"].items()) points[kind] = count.get<int>();
    check.charts.emplace_back(chart["class"].get<std::string>(), points);
  }
  for (const auto& title : result["ineligible_titles"]) check.ineligible_titles.push_back(title.get<std::string>());
  return check;
}

std::string ScreenshotIsNotBlank(const std::filesystem::path& html, const std::filesystem::path& png) {
  const std::filesystem::path chromium = "/usr/bin/chromium";
  if (!std::filesystem::exists(chromium)) {
    return "skip: chromium is not installed (/usr/bin/chromium); scripts/setup-debian.sh "
           "--with-chromium installs it";
  }
  const std::filesystem::path profile = png.parent_path() / "chromium-profile";
  const int status = RunCommand("timeout 180 '" + chromium.string() +
                                "' --headless --no-sandbox --disable-gpu --hide-scrollbars "
                                "--user-data-dir='" + profile.string() + "' --screenshot='" + png.string() +
                                "' --window-size=1200,3000 'file://" + html.string() + "' >/dev/null 2>&1");
  if (status != 0 || !std::filesystem::exists(png)) {
    return "chromium failed (status " + std::to_string(status) + ") or wrote no screenshot";
  }
  // A PNG check small enough to read: concatenate the IDAT chunks, inflate them, undo each
  // scanline's filter (PNG specification, filter types 0-4) and sample the pixels: a blank page
  // has one colour, a rendered report many.
  const std::string script =
      "import struct,sys,zlib\n"
      "data=open(sys.argv[1],'rb').read()\n"
      "assert data[:8]==b'\\x89PNG\\r\\n\\x1a\\n', 'not a PNG'\n"
      "pos=8; idat=b''; width=height=0; channels=4\n"
      "while pos<len(data):\n"
      "  length,kind=struct.unpack('>I4s',data[pos:pos+8]); body=data[pos+8:pos+8+length]\n"
      "  if kind==b'IHDR':\n"
      "    width,height,depth,colour=struct.unpack('>IIBB',body[:10]); channels={0:1,2:3,4:2,6:4}[colour]\n"
      "  if kind==b'IDAT': idat+=body\n"
      "  pos+=12+length\n"
      "raw=zlib.decompress(idat); stride=width*channels+1\n"
      "prev=bytearray(stride-1); colours=set()\n"
      "for row in range(height):\n"
      "  line=raw[row*stride:(row+1)*stride]; f=line[0]; cur=bytearray(line[1:])\n"
      "  for i in range(len(cur)):\n"
      "    a=cur[i-channels] if i>=channels else 0; b=prev[i]; c=prev[i-channels] if i>=channels else 0\n"
      "    if f==1: cur[i]=(cur[i]+a)&255\n"
      "    elif f==2: cur[i]=(cur[i]+b)&255\n"
      "    elif f==3: cur[i]=(cur[i]+(a+b)//2)&255\n"
      "    elif f==4:\n"
      "      p=a+b-c; pa=abs(p-a); pb=abs(p-b); pc=abs(p-c)\n"
      "      cur[i]=(cur[i]+(a if pa<=pb and pa<=pc else (b if pb<=pc else c)))&255\n"
      "  if row%25==0:\n"
      "    for x in range(0,width,7): colours.add(bytes(cur[x*channels:(x+1)*channels]))\n"
      "  prev=cur\n"
      "print(len(colours))\n";
  TempDir scratch;
  const auto script_path = scratch.Write("png_colours.py", script);
  std::string output;
  if (RunCommand("'" + ReferencePython() + "' '" + script_path.string() + "' '" + png.string() + "'", &output) != 0) {
    return "could not decode the screenshot: " + output;
  }
  const int colours = std::atoi(output.c_str());
  if (colours <= 1) return "the screenshot is blank (" + std::to_string(colours) + " colour)";
  return "";
}

}  // namespace stepledger::testing
