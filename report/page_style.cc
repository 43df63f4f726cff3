#include "report/page_style.h"

#include "report/html_text.h"

namespace chorus {
namespace page_style {

constexpr const char* kStyle =
    "body{font:15px/1.5 system-ui,-apple-system,'Segoe UI',Roboto,'DejaVu Sans',Arial,sans-serif;"
    "color:#1f2328;background:#f5f6f8;margin:0}"
    "main{max-width:1000px;margin:0 auto;padding:24px 24px 40px}"
    "h1{font-size:26px;margin:0 0 4px}h2{font-size:19px;margin:0 0 10px}"
    ".badge{display:inline-block;font-size:12px;font-weight:600;padding:2px 9px;border-radius:10px;"
    "background:#e3edf7;color:#0b4a78;vertical-align:middle;margin-left:8px}"
    ".sub,.note,figcaption,footer,.kpi .label,.kpi .detail{color:#4d5358}"
    "section{background:#fff;border:1px solid #d5dae0;border-radius:8px;padding:16px 20px;"
    "margin:16px 0;overflow-x:auto}"
    "section.caution{border-left:6px solid #a64d00;background:#fff7ef}"
    ".kpis{display:grid;grid-template-columns:repeat(auto-fit,minmax(170px,1fr));gap:12px;"
    "margin:16px 0}"
    ".kpi{background:#fff;border:1px solid #d5dae0;border-radius:8px;padding:10px 14px}"
    ".kpi .label{font-size:13px}.kpi .detail{font-size:12.5px}"
    ".kpi .value{font-size:25px;font-weight:650;font-variant-numeric:tabular-nums}"
    "table{border-collapse:collapse;width:100%;font-variant-numeric:tabular-nums;font-size:14px}"
    "th,td{padding:5px 10px;border-bottom:1px solid #e3e6ea;text-align:right}"
    "th:first-child,td:first-child{text-align:left}thead th{background:#f0f2f4;font-weight:600}"
    "tr.highlight>*{background:#e8f1fa;font-weight:600}"
    ".facts th{width:28%;font-weight:600}.facts td{text-align:left}"
    ".charts{display:grid;grid-template-columns:repeat(auto-fill,minmax(430px,1fr));gap:18px}"
    "figure{margin:0}figure svg{width:100%;height:auto;display:block}"
    "figcaption{font-size:13px;margin-top:2px}.note{font-style:italic}"
    ".hash{font-family:ui-monospace,'DejaVu Sans Mono',Menlo,Consolas,monospace;font-size:13px;"
    "word-break:break-all}"
    ".wbar{display:inline-block;height:9px;background:#0072B2;border-radius:2px;margin-right:8px}"
    ".nowrap{white-space:nowrap}footer{font-size:13px;text-align:center}"
    ".verdict{padding:8px 12px;border-left:5px solid #0072B2;background:#eef5fb}"
    ".verdict.warn{border-left-color:#a64d00;background:#fff7ef;font-weight:600}"
    "h3{font-size:16px;margin:14px 0 6px}"
    "td.reasons{text-align:left;font-size:13px;color:#4d5358;padding-top:0}";

}  // namespace page_style

std::string PageHead(const std::string& title) {
  return "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
         "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; "
         "style-src 'unsafe-inline'\"><meta name=\"viewport\" content=\"width=device-width, "
         "initial-scale=1\"><title>" +
         EscapeHtml(title) + "</title><style>" + page_style::kStyle + "</style></head><body><main>";
}

}  // namespace chorus
