"""Browser test of the web console: Debian's chromium, headless, driven by
chromium-driver through python3-selenium, on loopback. One scenario: a
therapist logs in, opens the worklist, logs a three-field fraction and sees
the action-level verdict with the hold, with the keyboard alone (keys are
sent to whatever has the focus; nothing is clicked); a physicist opens that
item and closes it with a signature; an auditor downloads the monthly PDF,
checked with qpdf --check. Screenshots of each page go to the build tree
(test-artefacts/web). Data invented (webfixture.py)."""
import glob
import os
import subprocess
import sys
import tempfile
import time
import unittest

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from webfixture import ARTEFACTS, Fxl, Server, department, reading_for  # noqa: E402

try:
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service
    from selenium.webdriver.common.by import By
    from selenium.webdriver.common.keys import Keys
    from selenium.webdriver.common.action_chains import ActionChains
    HAVE = os.path.exists("/usr/bin/chromium") and os.path.exists("/usr/bin/chromedriver")
except ImportError:
    HAVE = False


def d_url(driver):
    return driver.current_url


@unittest.skipUnless(HAVE, "chromium, chromium-driver and python3-selenium are needed (make test installs them)")
class BrowserScenario(unittest.TestCase):

    @classmethod
    def setUpClass(cls):
        cls.fx = fx = Fxl().init()
        department(fx, hostile=False)
        for u in ("ther", "phys", "aud"):
            assert fx.login(u).returncode == 0
        cls.server = Server(fx)
        cls.base = "http://127.0.0.1:%d" % cls.server.port
        cls.downloads = tempfile.mkdtemp(prefix="fxlweb-dl-")
        os.makedirs(ARTEFACTS, exist_ok=True)
        opts = webdriver.ChromeOptions()
        opts.binary_location = "/usr/bin/chromium"
        for a in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                  "--window-size=1280,800", "--lang=en-GB"):
            opts.add_argument(a)
        opts.add_experimental_option("prefs", {"download.default_directory": cls.downloads,
                                               "download.prompt_for_download": False})
        cls.driver = webdriver.Chrome(service=Service("/usr/bin/chromedriver"), options=opts)
        cls.driver.set_page_load_timeout(30)
        cls.driver.execute_cdp_cmd("Page.setDownloadBehavior",
                                   {"behavior": "allow", "downloadPath": cls.downloads})

    @classmethod
    def tearDownClass(cls):
        cls.driver.quit()
        cls.server.stop()
        cls.fx.close()

    def shot(self, name):
        self.driver.save_screenshot(os.path.join(ARTEFACTS, name + ".png"))

    def keys(self, *k):
        ActionChains(self.driver).send_keys(*k).perform()

    def focused(self):
        return self.driver.switch_to.active_element

    def wait_path(self, prefix, timeout=20):
        end = time.time() + timeout
        while time.time() < end:
            if (self.driver.current_url.startswith(self.base + prefix) and
                    self.driver.execute_script("return document.readyState") == "complete"):
                return
            time.sleep(0.05)
        self.fail("expected %s, at %s" % (prefix, self.driver.current_url))

    def wait_change(self, before, timeout=20):
        end = time.time() + timeout
        while d_url(self.driver) == before and time.time() < end:
            time.sleep(0.05)
        while self.driver.execute_script("return document.readyState") != "complete" and time.time() < end:
            time.sleep(0.05)
        self.assertNotEqual(d_url(self.driver), before)

    def keyboard_login(self, login):
        self.driver.delete_all_cookies()
        self.driver.get(self.base + "/login")
        self.assertEqual(self.focused().get_attribute("name"), "login")
        self.keys(login, Keys.TAB, self.fx.passwords[login], Keys.ENTER)

    def test_day_review_and_report(self):
        d = self.driver
        # ---- therapist, keyboard only ------------------------------------
        self.keyboard_login("ther")
        self.wait_path("/worklist")
        self.shot("01-worklist")
        button = self.focused()
        self.assertEqual(button.tag_name, "button")
        self.assertIn("Log fraction 1", button.text)
        self.keys(Keys.ENTER)
        self.wait_path("/fraction")
        self.shot("02-fraction-empty")
        # AP within, PA 12 % over (action level 8 %), LAT within
        for name, dev in (("AP", 0.5), ("PA", 12.0), ("LAT", -1.5)):
            field = self.focused()
            self.assertEqual(field.get_attribute("name"), "reading", "focus for %s" % name)
            before = d.current_url
            if name == "AP":
                # the first fraction knows no detector yet: Tab to it and type
                # the serial; later fields of the patient get it pre-filled
                self.keys(reading_for(dev), Keys.TAB, "D-1", Keys.ENTER)
            else:
                self.keys(reading_for(dev), Keys.ENTER)
            self.wait_change(before)
        page = d.find_element(By.TAG_NAME, "main").text
        self.shot("03-fraction-verdicts")
        self.assertIn("HOLD", page)
        self.assertIn("outside action level", page.lower())
        self.assertEqual(len(d.find_elements(By.CSS_SELECTOR, ".verdict.v-outside_action")), 1)
        self.assertEqual(len(d.find_elements(By.CSS_SELECTOR, ".verdict.v-within_tolerance")), 2)
        self.assertIn("physicist", page)
        close = self.focused()
        self.assertIn("Close fraction 1", close.text)
        self.keys(Keys.ENTER)
        self.wait_path("/fraction/close")
        self.shot("04-fraction-closed-hold")
        page = d.find_element(By.TAG_NAME, "main").text
        self.assertIn("Closed fraction 1", page)
        self.assertIn("HOLD", page)
        item_link = d.find_element(By.CSS_SELECTOR, ".hold a").get_attribute("href")

        # ---- physicist: the item, closed with a signature ---------------------
        self.keyboard_login("phys")
        self.wait_path("/queue")
        self.shot("05-queue")
        d.get(item_link)
        self.shot("06-item")
        chart = d.find_element(By.CSS_SELECTOR, "figure.chart svg")
        d.execute_script("arguments[0].scrollIntoView()", chart)
        self.shot("06b-item-trend")
        # the trend marks this item's result with the action-level square
        self.assertEqual(len(chart.find_elements(By.CSS_SELECTOR, "g.pt.this rect")), 1)
        d.find_element(By.ID, "disp").send_keys("set-up error")
        d.find_element(By.ID, "clc").send_keys("Invented: bolus left off; re-measured next fraction.")
        before = d.current_url
        d.find_element(By.ID, "clp").send_keys(self.fx.passwords["phys"], Keys.ENTER)
        self.wait_change(before)
        self.assertIn("done=", d.current_url)
        page = d.find_element(By.TAG_NAME, "main").text
        self.shot("07-item-closed-signed")
        self.assertIn("closed, signed", page)
        self.assertIn("Signed by Invented Physicist", page)
        self.assertIn("review closed", page)

        # ---- auditor: the monthly PDF -------------------------------------------
        self.keyboard_login("aud")
        self.wait_path("/reports")
        self.shot("08-reports")
        self.assertEqual(self.focused().get_attribute("name"), "month")
        self.keys(Keys.ENTER)
        pdf = None
        end = time.time() + 30
        while time.time() < end:
            done = [p for p in glob.glob(os.path.join(self.downloads, "*.pdf"))]
            if done and not glob.glob(os.path.join(self.downloads, "*.crdownload")):
                pdf = done[0]
                break
            time.sleep(0.2)
        self.assertIsNotNone(pdf, "no PDF downloaded")
        self.assertEqual(os.path.basename(pdf), "fxledger-month-2026-11.pdf")
        # qpdf --check: exit 0 for a well-formed file (qpdf manual)
        r = subprocess.run(["qpdf", "--check", pdf], capture_output=True, text=True)
        self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
        # verify as the auditor sees it
        d.get(self.base + "/verify")
        self.shot("09-verify")
        page = d.find_element(By.TAG_NAME, "main").text
        self.assertIn("Verified", page)
        self.assertIn("fxledger-anchor rows=", page)
        # a tablet in portrait: the same page without sideways scrolling
        d.set_window_size(820, 1180)
        d.get(self.base + "/queue?status=all")
        self.shot("10-queue-tablet")
        self.assertLessEqual(d.execute_script("return document.documentElement.scrollWidth"),
                             d.execute_script("return window.innerWidth") + 1)


if __name__ == "__main__":
    unittest.main(verbosity=2)
